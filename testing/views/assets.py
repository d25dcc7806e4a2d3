"""Plotly's browser bundle, served from the installed ``plotly`` package (no CDN; works offline)."""

from __future__ import annotations

import re
from functools import cache
from pathlib import Path

import plotly
from django.http import FileResponse, Http404, HttpRequest, HttpResponseBase
from django.views.decorators.http import require_GET

_BUNDLE = Path(plotly.__file__).resolve().parent / "package_data" / "plotly.min.js"


@cache
def plotly_version() -> str:
    return str(plotly.__version__)


@cache
def plotly_style_ids() -> tuple[str, ...]:
    """Ids of the ``<style>`` elements the bundle would insert itself.

    Under our CSP a script may not insert a ``<style>`` element without the page's nonce. Plotly
    writes its own rules into ``plotly.js-style-global`` through the CSSOM (allowed) if that element
    already exists, and skips a bundled stylesheet (the map library's, unused here) whose id is
    already present; so pages that load Plotly carry empty, nonce-bearing elements with these ids.
    """
    ids = ["plotly.js-style-global"]
    if _BUNDLE.is_file():
        text = _BUNDLE.read_text(encoding="utf-8", errors="replace")
        ids += re.findall(
            r'if\(!document\.getElementById\("([^"]+)"\)\)\{var \w+=document\.createElement\("style"\)',
            text,
        )
    return tuple(dict.fromkeys(ids))


@require_GET
def plotly_js(request: HttpRequest, version: str) -> HttpResponseBase:
    """The bundle at a versioned URL, so browsers may keep it for a year."""
    if version != plotly_version() or not _BUNDLE.is_file():
        raise Http404("No such asset.")
    response = FileResponse(_BUNDLE.open("rb"), content_type="text/javascript; charset=utf-8")
    response["Cache-Control"] = "public, max-age=31536000, immutable"
    return response
