"""Uploads: the size cap holds before any parsing, misnamed files and zip bombs are refused,
stored names are generated, download names are sanitised.

Reliability plan row "uploads": one byte over the cap; an XLSX zip bomb; a file whose name is
`../../x` → rejected before parsing; stored names are generated. Header syntax for download names:
RFC 6266 (Content-Disposition) and RFC 5987 (filename*), as Django writes them.
"""

from __future__ import annotations

import io
import re
import zipfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.test import Client
from django.urls import reverse

from reports.models import ReportRevision
from testing.models import ImportState, ReadingImport, ShearStage
from testing.services import imports
from testing.services.errors import ServiceError
from tests.conftest import Cast, Records
from tests.importers.conftest import as_bytes, canonical_lines, make_stage

pytestmark = pytest.mark.security

CAP = 4096


@pytest.fixture
def stage(cast: Cast, records_a: Records, media_root: str, settings: Any) -> ShearStage:
    settings.TAULINE_MAX_UPLOAD_BYTES = CAP
    return make_stage(cast, records_a, 1, force_unit="N")


@pytest.fixture
def parser_calls(monkeypatch: pytest.MonkeyPatch) -> list[str]:
    """Records every call into the parsers and the archive check."""
    calls: list[str] = []

    def spy(name: str, real: Callable[..., Any]) -> Callable[..., Any]:
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            calls.append(name)
            return real(*args, **kwargs)

        return wrapper

    for name in ("parse_readings", "preview_readings", "check_archive"):
        monkeypatch.setattr(imports, name, spy(name, getattr(imports, name)))
    return calls


def _stored_files(root: str) -> list[Path]:
    return [p for p in Path(root).rglob("*") if p.is_file() and "imports" in p.parts]


class _Stream:
    """An upload that does not know its size (a chunked request body)."""

    def __init__(self, data: bytes, name: str) -> None:
        self._buffer = io.BytesIO(data)
        self.name = name
        self.reads: list[int] = []

    def read(self, size: int = -1, /) -> bytes:
        self.reads.append(size)
        return self._buffer.read(size)


def test_one_byte_over_the_cap_is_refused_before_parsing(
    cast: Cast, stage: ShearStage, parser_calls: list[str], media_root: str
) -> None:
    over = SimpleUploadedFile("run.csv", b"1" * (CAP + 1), content_type="text/csv")
    with pytest.raises(imports.UploadTooLarge):
        imports.stage_readings_import(user=cast.technician, stage=stage, upload=over)
    with pytest.raises(imports.UploadTooLarge):
        imports.stage_readings_preview(user=cast.technician, stage=stage, upload=over)
    # A stream whose size is unknown: read no further than one byte past the cap.
    stream = _Stream(b"1" * (CAP * 50), "run.csv")
    with pytest.raises(imports.UploadTooLarge):
        imports.stage_readings_import(user=cast.technician, stage=stage, upload=stream)
    assert stream.reads == [CAP + 1]
    assert parser_calls == []
    assert ReadingImport.objects.count() == 0
    assert _stored_files(media_root) == []


def test_exactly_at_the_cap_reaches_the_parser(
    cast: Cast, stage: ShearStage, parser_calls: list[str]
) -> None:
    data = as_bytes(canonical_lines(n_shear=40))
    data = data + b"#" * (CAP - len(data))  # padded to the cap with a comment-like tail
    assert len(data) == CAP
    record = imports.stage_readings_import(
        user=cast.technician, stage=stage, upload=SimpleUploadedFile("run.csv", data)
    )
    assert "parse_readings" in parser_calls
    assert record.state in {ImportState.SUCCEEDED, ImportState.REJECTED}


def test_an_over_cap_upload_through_the_page_is_refused(
    cast: Cast, stage: ShearStage, parser_calls: list[str], media_root: str
) -> None:
    client = Client()
    client.force_login(cast.technician)
    over = SimpleUploadedFile("run.csv", b"1" * (CAP + 1), content_type="text/csv")
    response = client.post(reverse("stage-import", args=[stage.pk]), {"upload": over}, follow=True)
    assert response.status_code in {200, 400, 413}
    assert f"{CAP} bytes" in response.content.decode()
    assert parser_calls == []
    assert ReadingImport.objects.count() == 0


def _workbook_bytes() -> bytes:
    from openpyxl import Workbook

    book = Workbook()
    book.active.append(["elapsed_min", "horizontal_mm"])  # type: ignore[union-attr]
    out = io.BytesIO()
    book.save(out)
    return out.getvalue()


def test_an_xlsx_that_is_really_csv_is_refused_with_a_clear_message(
    cast: Cast, stage: ShearStage, parser_calls: list[str]
) -> None:
    data = as_bytes(canonical_lines(n_shear=20))
    record = imports.stage_readings_import(
        user=cast.technician, stage=stage, upload=SimpleUploadedFile("run.xlsx", data)
    )
    assert record.state == ImportState.REJECTED
    assert "not a valid XLSX workbook" in record.reason
    assert "parse_readings" not in parser_calls
    with pytest.raises(ServiceError, match="not a valid XLSX workbook"):
        imports.stage_readings_preview(
            user=cast.technician, stage=stage, upload=SimpleUploadedFile("run.xlsx", data)
        )


def test_a_csv_that_is_really_a_workbook_is_refused_with_a_clear_message(
    cast: Cast, stage: ShearStage, parser_calls: list[str], settings: Any
) -> None:
    settings.TAULINE_MAX_UPLOAD_BYTES = 1_000_000
    data = _workbook_bytes()
    record = imports.stage_readings_import(
        user=cast.technician, stage=stage, upload=SimpleUploadedFile("run.csv", data)
    )
    assert record.state == ImportState.REJECTED
    assert "named as a text file but is a zip archive" in record.reason
    assert parser_calls == []
    with pytest.raises(ServiceError, match="real extension"):
        imports.stage_readings_preview(
            user=cast.technician, stage=stage, upload=SimpleUploadedFile("run.txt", data)
        )


def test_an_xlsx_zip_bomb_is_refused_without_unpacking(
    cast: Cast, stage: ShearStage, parser_calls: list[str], settings: Any
) -> None:
    settings.TAULINE_MAX_UPLOAD_BYTES = 1_000_000
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/worksheets/sheet1.xml", b"\0" * 50_000_000)  # 50 MB of zeros
    bomb = out.getvalue()
    assert len(bomb) < 100_000
    record = imports.stage_readings_import(
        user=cast.technician, stage=stage, upload=SimpleUploadedFile("run.xlsx", bomb)
    )
    assert record.state == ImportState.REJECTED
    assert "zip bomb" in record.reason or "unpacks to" in record.reason
    assert "parse_readings" not in parser_calls


@pytest.mark.parametrize(
    "hostile", ["../../x", "..\\..\\windows\\evil.csv", "/etc/passwd", "run\x00.csv.exe", ".."]
)
def test_stored_names_are_generated_whatever_the_uploaded_name(
    cast: Cast, stage: ShearStage, media_root: str, hostile: str
) -> None:
    data = as_bytes(canonical_lines(n_shear=20))
    record = imports.stage_readings_import(
        user=cast.technician, stage=stage, upload=_named(data, hostile)
    )
    stored = record.original_file.name
    assert re.fullmatch(r"imports/\d{4}/\d{2}/[0-9a-f]{32}\.(csv|txt|xlsx|ags|bin)", stored), stored
    path = Path(record.original_file.path).resolve()
    assert path.is_relative_to(Path(media_root).resolve())
    assert "/" not in record.original_name and "\\" not in record.original_name
    assert "\x00" not in record.original_name


def _named(data: bytes, name: str) -> Any:
    # Django's own upload objects refuse some of these names; a caller of the service (a
    # management command, a future API) need not use them.
    return _Stream(data, name)


def test_download_names_are_sanitised(
    cast: Cast,
    records_a: Records,
    settings: Any,
    django_capture_on_commit_callbacks: Callable[..., Any],
    media_root: str,
) -> None:
    """A report number built from a hostile project reference downloads under a safe name."""
    from tests.security.conftest import issued_revision_for

    settings.TAULINE_REPORT_NUMBER_PATTERN = "{project}-{seq:04d}"
    records_a.project.reference = 'A"; filename=..\\..\\évil/x'
    records_a.project.save(update_fields=["reference"])
    revision: ReportRevision = issued_revision_for(
        cast, records_a, django_capture_on_commit_callbacks
    )
    staff = Client()
    staff.force_login(cast.technician)
    client = Client()
    client.force_login(cast.client_a)
    answers = [
        staff.get(reverse("reports:pdf", args=[revision.pk])),
        client.get(reverse("portal:pdf", args=[revision.public_id])),
    ]
    for response in answers:
        assert response.status_code == 200
        header = response["Content-Disposition"]
        assert header.startswith("attachment;")
        # Either RFC 5987 percent-encoding or a quoted string with its quotes escaped: no bare
        # quote, separator or path can break out of the file name.
        value = header.removeprefix("attachment;").strip()
        if value.startswith("filename*="):
            assert re.fullmatch(r"filename\*=utf-8''[A-Za-z0-9%._~!$&'()*+,;=:@-]+", value), value
            assert "/" not in value and "\\" not in value and '"' not in value
        else:
            inner = re.fullmatch(r'filename="((?:[^"\\]|\\.)*)"', value)
            assert inner is not None, value
        assert "\r" not in header and "\n" not in header
