"""Step 3 of rendering: HTML to PDF. The only module that imports WeasyPrint.

Report text comes from users, so the renderer must never reach a file or the network on its
behalf. :class:`RestrictedFetcher` serves only the app's own static files and small ``data:`` URLs,
follows no redirects, and refuses everything else (``file:``, ``http(s):`` to anywhere, ``ftp:`` …).
"""

from __future__ import annotations

import base64
import logging
import mimetypes
import posixpath
import urllib.parse
from pathlib import Path

from django.contrib.staticfiles import finders
from weasyprint import HTML, URLFetcher
from weasyprint.urls import URLFetcherResponse

logger = logging.getLogger(__name__)
# WeasyPrint logs every layout step at INFO; keep its warnings only.
logging.getLogger("weasyprint.progress").setLevel(logging.WARNING)

# Relative URLs resolve against this made-up origin, which maps to the app's static files only.
ASSET_BASE_URL = "https://tauline-assets.invalid/static/"
MAX_DATA_URL_BYTES = 512 * 1024


class FetchRefused(ValueError):
    """A resource the report may not load."""


class RestrictedFetcher(URLFetcher):
    """Serves the app's static assets and small data: URLs; refuses everything else."""

    def __init__(self) -> None:
        super().__init__(allowed_protocols=("data", "https"), allow_redirects=False, timeout=1)
        self.refused: list[str] = []
        self.served: list[str] = []

    def fetch(self, url: str, headers: object = None) -> URLFetcherResponse:
        if url.startswith("data:"):
            return self._data(url)
        if url.startswith(ASSET_BASE_URL):
            return self._static(url)
        self.refused.append(url)
        logger.warning("report renderer refused to fetch %s", url[:200])
        raise FetchRefused(f"Report rendering does not fetch {url[:80]!r}.")

    def _data(self, url: str) -> URLFetcherResponse:
        header, _, payload = url[5:].partition(",")
        if len(payload) > MAX_DATA_URL_BYTES * 4 // 3 + 4:
            self.refused.append(url[:80])
            raise FetchRefused("data: URL too large for a report.")
        mime = header.split(";")[0] or "text/plain"
        body = (
            base64.b64decode(payload)
            if header.endswith(";base64")
            else urllib.parse.unquote_to_bytes(payload)
        )
        self.served.append("data:")
        return URLFetcherResponse(url, body, {"Content-Type": mime})

    def _static(self, url: str) -> URLFetcherResponse:
        parsed = urllib.parse.urlsplit(url)
        relative = posixpath.normpath(urllib.parse.unquote(parsed.path)[len("/static/") :])
        if relative.startswith(("..", "/")) or "\\" in relative or "\0" in relative:
            self.refused.append(url)
            raise FetchRefused("Asset path outside the static files.")
        found = finders.find(relative)
        if not found or isinstance(found, list):
            self.refused.append(url)
            raise FetchRefused(f"No static asset {relative!r}.")
        path = Path(found)
        mime = mimetypes.guess_type(path.name)[0] or "application/octet-stream"
        self.served.append(url)
        return URLFetcherResponse(url, path.read_bytes(), {"Content-Type": mime})


def html_to_pdf(html: str, *, fetcher: RestrictedFetcher | None = None) -> bytes:
    """Render report HTML to PDF bytes through the restricted fetcher."""
    fetcher = fetcher or RestrictedFetcher()
    document = HTML(string=html, base_url=ASSET_BASE_URL, url_fetcher=fetcher)
    pdf = document.write_pdf()
    assert pdf is not None
    return bytes(pdf)
