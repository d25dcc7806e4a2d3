"""Plotly's browser bundle, served from the installed ``plotly`` package (no CDN; works offline)."""

from __future__ import annotations

from functools import cache
from pathlib import Path

import plotly
from django.http import FileResponse, Http404, HttpRequest, HttpResponseBase
from django.views.decorators.http import require_GET

_BUNDLE = Path(plotly.__file__).resolve().parent / "package_data" / "plotly.min.js"


@cache
def plotly_version() -> str:
    return str(plotly.__version__)


@require_GET
def plotly_js(request: HttpRequest, version: str) -> HttpResponseBase:
    """The bundle at a versioned URL, so browsers may keep it for a year."""
    if version != plotly_version() or not _BUNDLE.is_file():
        raise Http404("No such asset.")
    response = FileResponse(_BUNDLE.open("rb"), content_type="text/javascript; charset=utf-8")
    response["Cache-Control"] = "public, max-age=31536000, immutable"
    return response
