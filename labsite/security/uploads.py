"""Upload size caps that hold before anything parses the body.

Two guards, because a client may or may not announce the size:

- ``UploadLimitMiddleware`` answers 413 to a request whose ``Content-Length`` is over the cap of
  its path, before CSRF or a view reads the body (nothing is read, nothing is stored);
- ``CappedUploadHandler`` (first of ``FILE_UPLOAD_HANDLERS``) counts the bytes of a multipart
  upload as they arrive and stops the request once they pass the cap, for a body sent without a
  length (chunked).

The caps: ``TAULINE_MAX_UPLOAD_BYTES`` for readings files and everything else, the verification
page's own smaller cap for ``/verify/``; a fixed allowance covers the multipart framing and the
form's other fields.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from django.conf import settings
from django.core.exceptions import RequestDataTooBig
from django.core.files.uploadhandler import FileUploadHandler
from django.http import HttpRequest, HttpResponse, JsonResponse

FORM_ALLOWANCE_BYTES = 256 * 1024


def cap_for(path: str) -> int:
    """The most bytes a request to ``path`` may carry, framing included."""
    if path.startswith("/verify/"):
        from reports.verification import MAX_UPLOAD_BYTES

        return MAX_UPLOAD_BYTES + FORM_ALLOWANCE_BYTES
    return int(settings.TAULINE_MAX_UPLOAD_BYTES) + FORM_ALLOWANCE_BYTES


def _megabytes(n: int) -> str:
    return f"{n / 1_000_000:.1f} MB"


def too_large_response(request: HttpRequest, cap: int) -> HttpResponse:
    message = (
        f"The upload is larger than this site accepts ({_megabytes(cap)} at most); nothing was "
        "read or saved. Split the file, or ask the administrator about TAULINE_MAX_UPLOAD_BYTES."
    )
    if request.path.startswith("/api/"):
        return JsonResponse({"detail": message, "errors": {}}, status=413)
    return HttpResponse(message, status=413, content_type="text/plain; charset=utf-8")


class UploadLimitMiddleware:
    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        try:
            length = int(request.META.get("CONTENT_LENGTH") or 0)
        except ValueError:
            length = 0
        cap = cap_for(request.path)
        if length > cap:
            return too_large_response(request, cap)
        return self.get_response(request)


class CappedUploadHandler(FileUploadHandler):
    """Stops a multipart body that grows past the path's cap (sent without a Content-Length)."""

    def __init__(self, request: Any = None) -> None:
        super().__init__(request)
        self.received = 0
        self.cap = cap_for(request.path if request is not None else "/")

    def receive_data_chunk(self, raw_data: bytes, start: int) -> bytes:
        self.received += len(raw_data)
        if self.received > self.cap:
            raise RequestDataTooBig(f"upload over {_megabytes(self.cap)}")
        return raw_data  # the next handler stores it

    def file_complete(self, file_size: int) -> None:
        return None
