"""User text cannot make the PDF renderer fetch, read or attach anything (SSRF / local file read)."""

from __future__ import annotations

import http.server
import io
import subprocess
import tempfile
import threading
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from pypdf import PdfReader

from reports import services
from reports.rendering.html import render_report_html
from reports.rendering.pdf import RestrictedFetcher, html_to_pdf
from testing.models import Organisation, Project, Sample
from tests.conftest import Cast, Records
from tests.reports.conftest import build_test_set, compute

pytestmark = pytest.mark.security


@pytest.fixture
def canary() -> Iterator[tuple[int, list[str]]]:
    """A tiny HTTP server on a free loopback port that records every request it gets."""
    hits: list[str] = []

    class Handler(http.server.BaseHTTPRequestHandler):
        def do_GET(self) -> None:
            hits.append(self.path)
            self.send_response(200)
            self.end_headers()
            self.wfile.write(b"canary")

        def log_message(self, *args: Any) -> None:
            pass

    server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield server.server_address[1], hits
    finally:
        server.shutdown()
        server.server_close()


def _payload(port: int, secret_file: Path) -> str:
    base = f"http://127.0.0.1:{port}"
    return (
        f' <img src="{base}/img"> <link rel="attachment" href="file://{secret_file}">'
        f' <link rel="stylesheet" href="{base}/css"> <style>@import url("{base}/import");'
        f' body {{ background: url("{base}/bg") }}</style> <iframe src="file://{secret_file}"></iframe>'
        f' <svg><image href="{base}/svg-image"/></svg> <object data="file:///etc/passwd"></object>'
        f' <a href="{base}/link">x</a> url({base}/bare) @import "{base}/bare-import";'
    )


def _fitted(model: Any, **values: str) -> dict[str, str]:
    """Each value cut to its column's length (PostgreSQL enforces it; SQLite does not)."""
    out = {}
    for name, value in values.items():
        limit = model._meta.get_field(name).max_length
        out[name] = value[:limit] if limit else value
    return out


def test_injection_in_every_text_field(
    cast: Cast,
    records_a: Records,
    canary: tuple[int, list[str]],
    django_capture_on_commit_callbacks: Callable[..., Any],
) -> None:
    port, hits = canary
    with tempfile.NamedTemporaryFile("w", suffix=".txt", delete=False) as fh:
        fh.write("CANARY-FILE-CONTENT-7f3a")
        secret = Path(fh.name)
    text = _payload(port, secret)
    Organisation.objects.filter(pk=cast.org_a.pk).update(
        **_fitted(Organisation, name=f"Client A{text}", address=text, contact_name=text),
        contact_email="a@example.org",
    )
    Project.objects.filter(pk=records_a.project.pk).update(
        **_fitted(
            Project, name=f"Site{text}", site_name=text, site_location=text, client_reference=text
        )
    )
    Sample.objects.filter(pk=records_a.sample.pk).update(
        **_fitted(Sample, description=text, condition_on_receipt=text)
    )
    records_a.project.refresh_from_db()
    records_a.sample.refresh_from_db()
    test = build_test_set(
        user=cast.technician, project=records_a.project, sample=records_a.sample, text=text
    )
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    revision = services.report_create(
        user=cast.technician,
        project=records_a.project,
        tests=[test],
        title=f"Report{text}"[:200],
        remarks=text,
        deviations=text,
    )
    fetcher = RestrictedFetcher()
    html = render_report_html(revision)
    pdf = html_to_pdf(html, fetcher=fetcher)

    assert hits == []  # 0 requests reached the canary server
    # Only our own charts (data: images) were loaded; every URL from user text was refused or,
    # being escaped text, never became a URL at all.
    assert fetcher.served == ["data:"] * 4
    assert all(not u.startswith(("http", "file:")) for u in fetcher.served)
    reader = PdfReader(io.BytesIO(pdf))
    assert reader.attachments == {}  # 0 attachments
    out = subprocess.run(
        ["pdftotext", "-", "-"], input=pdf, capture_output=True, check=True
    ).stdout.decode()
    assert "CANARY-FILE-CONTENT-7f3a" not in out  # 0 files read into the document
    flat = " ".join(out.split())
    # The markup appears as text, escaped, not interpreted.
    assert '<link rel="attachment"' in flat
    assert "@import url(" in flat
    assert "<svg><image href=" in flat
    style = html.split("<style>", 1)[1].split("</style>", 1)[0]
    assert "127.0.0.1" not in style and "file:" not in style  # no user text in our stylesheet
    assert '<link rel="attachment"' not in html  # never raw in the HTML
    secret.unlink()
