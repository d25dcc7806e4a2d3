"""Upload caps hold before anything reads the body: an announced length over the cap is refused
with 413 before CSRF, sign-in or the view look at it; a body that grows past the cap while it
arrives is stopped by the upload handler."""

from __future__ import annotations

import io
from typing import Any

import pytest
from django.core.exceptions import RequestDataTooBig
from django.test import Client, RequestFactory

from labsite.security.uploads import FORM_ALLOWANCE_BYTES, CappedUploadHandler, cap_for
from reports.verification import MAX_UPLOAD_BYTES as VERIFY_CAP
from testing.models import ReadingImport

pytestmark = [pytest.mark.security, pytest.mark.django_db]

CAP = 4096


@pytest.fixture(autouse=True)
def _small_cap(settings: Any) -> None:
    settings.TAULINE_MAX_UPLOAD_BYTES = CAP


def test_an_announced_length_over_the_cap_is_refused_before_the_body_is_read() -> None:
    client = Client(enforce_csrf_checks=True)
    body = b"x" * 100  # what is sent is small; what is announced is not
    response = client.generic(
        "POST",
        "/stages/1/import/",
        body,
        content_type="multipart/form-data; boundary=zz",
        CONTENT_LENGTH=str(CAP + FORM_ALLOWANCE_BYTES + 1),
    )
    assert response.status_code == 413  # not 403 (CSRF) and not a redirect to sign in
    assert "nothing was read or saved" in response.content.decode()
    assert ReadingImport.objects.count() == 0


def test_a_real_file_over_the_cap_is_refused_and_one_under_it_reaches_the_page() -> None:
    client = Client()
    big = io.BytesIO(b"time_s\r\n" + b"1\r\n" * (CAP + FORM_ALLOWANCE_BYTES))
    big.name = "big.csv"
    assert client.post("/stages/1/import/", {"file": big}).status_code == 413
    small = io.BytesIO(b"time_s\r\n1\r\n")
    small.name = "small.csv"
    # Under the cap the request goes on to the page, which sends a visitor to sign in.
    assert client.post("/stages/1/import/", {"file": small}).status_code == 302


def test_the_api_answers_413_with_the_usual_error_body() -> None:
    response = Client().generic(
        "POST",
        "/api/v1/stages/1/readings-upload/",
        b"",
        content_type="multipart/form-data; boundary=zz",
        CONTENT_LENGTH=str(10 * CAP + FORM_ALLOWANCE_BYTES),
    )
    assert response.status_code == 413
    body = response.json()
    assert set(body) == {"detail", "errors"} and "at most" in body["detail"]


def test_the_verification_page_keeps_its_own_smaller_cap(settings: Any) -> None:
    settings.TAULINE_MAX_UPLOAD_BYTES = 100_000_000
    assert cap_for("/verify/") == VERIFY_CAP + FORM_ALLOWANCE_BYTES
    response = Client().generic(
        "POST",
        "/verify/",
        b"",
        content_type="multipart/form-data; boundary=zz",
        CONTENT_LENGTH=str(VERIFY_CAP + FORM_ALLOWANCE_BYTES + 1),
    )
    assert response.status_code == 413


def test_the_handler_stops_a_body_that_grows_past_the_cap() -> None:
    request = RequestFactory().post("/stages/1/import/")
    handler = CappedUploadHandler(request)
    chunk = b"x" * 1024
    for _ in range((CAP + FORM_ALLOWANCE_BYTES) // len(chunk)):
        assert handler.receive_data_chunk(chunk, 0) == chunk
    with pytest.raises(RequestDataTooBig):
        handler.receive_data_chunk(chunk, 0)
