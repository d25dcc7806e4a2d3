"""The import rows of the reliability plan: all-or-nothing, failure part-way, duplicates, the
stored original and its hash, hostile file names, and the size cap."""

from __future__ import annotations

import hashlib
from pathlib import Path
from typing import Any

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.db import OperationalError
from django.db.models import Sum

from testing.models import (
    ComputationRun,
    ConsolidationReading,
    ImportState,
    ReadingImport,
    ShearReadingBlock,
    ShearStage,
)
from testing.selectors_readings import shear_columns, shear_reading_count
from testing.services import imports, readings_store
from testing.services.errors import NotAllowed, ServiceError
from testing.services.imports import UploadTooLarge, stage_readings_import
from tests.conftest import Cast
from tests.importers.conftest import as_bytes, canonical_lines


@pytest.fixture(autouse=True)
def _media(settings: Any, tmp_path: Path) -> None:
    settings.MEDIA_ROOT = tmp_path / "media"


def _all_shear_readings() -> int:
    """Shear readings stored, all stages together."""
    return ShearReadingBlock.objects.aggregate(n=Sum("count"))["n"] or 0


def _upload(data: bytes, name: str = "logger.csv") -> SimpleUploadedFile:
    return SimpleUploadedFile(name, data, content_type="text/csv")


def _seven_bad_rows() -> tuple[bytes, list[tuple[int, str]]]:
    """500 readings; 7 of them broken in 7 different ways. Returns the file and (row, column)."""
    lines = canonical_lines(500)
    # File row r is lines[r - 1] (row 1 is the header).
    lines[10 - 1] = "54,0.080,abc,82.40,shear"  # text in a number column
    lines[60 - 1] = "354,0.580,0.0236"  # missing column (row cut short)
    lines[120 - 1] = "714,1.18 in,0.0476,115.70,shear"  # wrong unit in a mm column
    lines[200 - 1] = lines[199 - 1].split(",")[0] + ",1.980,0.0796,139.70,shear"  # duplicate time
    lines[300 - 1] = "1794,2.980,0.1196,nan,shear"  # not a finite number
    lines[400 - 1] = "2394,3.980,0.1596,199.70,shaer"  # unknown phase
    lines[450 - 1] = "-5,4.480,0.1796,214.70,shear"  # negative time
    expected = [
        (10, "vertical_displacement_mm"),
        (60, "shear_force_n"),
        (120, "horizontal_displacement_mm"),
        (200, "time_s"),
        (300, "shear_force_n"),
        (400, "phase"),
        (450, "time_s"),
    ]
    return as_bytes(lines), expected


@pytest.mark.django_db
def test_a_file_with_seven_bad_rows_saves_nothing_and_lists_all_seven(
    cast: Cast, load_cell_stage: ShearStage
) -> None:
    data, expected = _seven_bad_rows()
    record = stage_readings_import(
        user=cast.technician, stage=load_cell_stage, upload=_upload(data)
    )
    assert record.state == ImportState.REJECTED
    assert _all_shear_readings() == 0
    assert ConsolidationReading.objects.count() == 0
    assert sorted((e["row"], e["column"]) for e in record.errors) == expected
    assert all(e["reason"] for e in record.errors)
    by_row = {e["row"]: e for e in record.errors}
    assert by_row[10]["value"] == "abc" and by_row[10]["reason"] == "not a number"
    assert "wrong unit" in by_row[120]["reason"]
    assert "duplicate reading" in by_row[200]["reason"] and "row 199" in by_row[200]["reason"]
    assert "negative time" in by_row[450]["reason"]
    assert record.reason.startswith("7 bad row(s)")
    assert ComputationRun.objects.count() == 0


@pytest.mark.django_db(transaction=True)
def test_database_failing_at_row_250_saves_nothing_marks_failed_and_a_retry_saves_500(
    cast: Cast, load_cell_stage: ShearStage, monkeypatch: pytest.MonkeyPatch
) -> None:
    data = as_bytes(canonical_lines(500))
    written: list[int] = []
    real_batch = readings_store._write_shear_batch

    def dying_batch(write: Any, parsed: Any, start: int, stop: int) -> None:
        if start >= 250:
            raise OperationalError("server closed the connection unexpectedly")
        real_batch(write, parsed, start, stop)
        written.append(stop - start)

    monkeypatch.setattr(readings_store, "BLOCK_READINGS", 50)
    monkeypatch.setattr(readings_store, "_write_shear_batch", dying_batch)
    first = stage_readings_import(user=cast.technician, stage=load_cell_stage, upload=_upload(data))
    assert sum(written) == 250  # the failure came after 250 rows had been sent
    assert first.state == ImportState.FAILED
    assert "server closed the connection" in first.reason
    assert _all_shear_readings() == 0
    first.refresh_from_db()
    assert first.state == ImportState.FAILED and first.reason
    assert not ComputationRun.objects.exists()

    monkeypatch.setattr(readings_store, "_write_shear_batch", real_batch)
    retry = stage_readings_import(user=cast.technician, stage=load_cell_stage, upload=_upload(data))
    assert retry.state == ImportState.SUCCEEDED
    assert shear_reading_count(load_cell_stage.pk) == 500
    assert retry.shear_rows == 500
    assert ComputationRun.objects.filter(stage=load_cell_stage, kind="stage_reduction").exists()


@pytest.mark.django_db
def test_the_same_file_twice_adds_nothing_and_names_the_first_import(
    cast: Cast, load_cell_stage: ShearStage
) -> None:
    data = as_bytes(canonical_lines(120, n_cons=12))
    first = stage_readings_import(user=cast.technician, stage=load_cell_stage, upload=_upload(data))
    assert first.state == ImportState.SUCCEEDED
    counts = (_all_shear_readings(), ConsolidationReading.objects.count())
    assert counts == (120, 12)
    second = stage_readings_import(
        user=cast.technician, stage=load_cell_stage, upload=_upload(data, "copy of logger.csv")
    )
    assert second.state == ImportState.DUPLICATE
    assert second.duplicate_of == first
    assert f"import #{first.pk}" in second.reason and "logger.csv" in second.reason
    assert (_all_shear_readings(), ConsolidationReading.objects.count()) == counts
    assert ReadingImport.objects.filter(state=ImportState.SUCCEEDED).count() == 1


@pytest.mark.django_db
def test_a_new_file_replaces_the_phase_it_carries_and_supersedes_the_old_import(
    cast: Cast, load_cell_stage: ShearStage
) -> None:
    first = stage_readings_import(
        user=cast.technician,
        stage=load_cell_stage,
        upload=_upload(as_bytes(canonical_lines(120, n_cons=12))),
    )
    second = stage_readings_import(
        user=cast.technician, stage=load_cell_stage, upload=_upload(as_bytes(canonical_lines(150)))
    )
    assert second.state == ImportState.SUCCEEDED and second.replaced_rows == 120
    assert _all_shear_readings() == 150
    assert ConsolidationReading.objects.count() == 12  # the new file had no consolidation rows
    first.refresh_from_db()
    assert first.state == ImportState.SUPERSEDED


@pytest.mark.django_db
def test_the_stored_original_is_byte_identical_and_its_sha256_matches(
    cast: Cast, load_cell_stage: ShearStage, settings: Any
) -> None:
    data = as_bytes(canonical_lines(110))
    record = stage_readings_import(
        user=cast.technician, stage=load_cell_stage, upload=_upload(data)
    )
    stored = Path(settings.MEDIA_ROOT) / record.original_file.name
    assert stored.read_bytes() == data
    # Checked with hashlib (Python standard library) against the recorded value.
    assert (
        hashlib.sha256(stored.read_bytes()).hexdigest()
        == record.sha256
        == hashlib.sha256(data).hexdigest()
    )
    assert record.size_bytes == len(data)


@pytest.mark.django_db
@pytest.mark.parametrize(
    "name", ["../../x", "..\\..\\evil.csv", "/etc/passwd", "a\x00b.csv", "x.csv.exe"]
)
def test_hostile_file_names_get_generated_storage_names(
    cast: Cast, load_cell_stage: ShearStage, settings: Any, name: str
) -> None:
    record = stage_readings_import(
        user=cast.technician,
        stage=load_cell_stage,
        upload=_upload(as_bytes(canonical_lines(101)), name),
    )
    stored = Path(record.original_file.name)
    assert stored.parts[0] == "imports" and ".." not in stored.parts
    assert stored.stem not in name and len(stored.stem) == 32  # a uuid4 hex, not the user's name
    assert stored.suffix in {".csv", ".bin"}
    media = Path(settings.MEDIA_ROOT).resolve()
    assert (media / stored).resolve().is_relative_to(media)
    assert "/" not in record.original_name and "\\" not in record.original_name
    assert "\x00" not in record.original_name


@pytest.mark.django_db
def test_one_byte_over_the_cap_is_refused_before_parsing_and_nothing_is_stored(
    cast: Cast, load_cell_stage: ShearStage, settings: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    data = as_bytes(canonical_lines(200))
    settings.TAULINE_MAX_UPLOAD_BYTES = len(data) - 1

    def parser_must_not_run(*args: object, **kwargs: object) -> None:
        raise AssertionError("parsed a file over the cap")

    monkeypatch.setattr(imports, "parse_readings", parser_must_not_run)
    with pytest.raises(UploadTooLarge):
        stage_readings_import(user=cast.technician, stage=load_cell_stage, upload=_upload(data))

    class NoSize:  # a stream that does not announce its size is cut off at cap + 1 bytes
        name = "stream.csv"

        def __init__(self) -> None:
            self.asked: list[int] = []

        def read(self, size: int = -1) -> bytes:
            self.asked.append(size)
            return data[:size]

    stream = NoSize()
    with pytest.raises(UploadTooLarge):
        stage_readings_import(user=cast.technician, stage=load_cell_stage, upload=stream)
    assert stream.asked == [len(data)]
    assert not ReadingImport.objects.exists()
    assert not (Path(settings.MEDIA_ROOT) / "imports").exists()

    settings.TAULINE_MAX_UPLOAD_BYTES = len(data)
    monkeypatch.undo()
    settings.MEDIA_ROOT = settings.MEDIA_ROOT  # unchanged; the cap now admits the file exactly
    record = stage_readings_import(
        user=cast.technician, stage=load_cell_stage, upload=_upload(data)
    )
    assert record.state == ImportState.SUCCEEDED


@pytest.mark.django_db
def test_only_lab_technicians_import_and_reported_sets_are_closed(
    cast: Cast, load_cell_stage: ShearStage
) -> None:
    data = as_bytes(canonical_lines(101))
    for user in (cast.checker, cast.client_a, cast.deactivated):
        with pytest.raises(NotAllowed):
            stage_readings_import(user=user, stage=load_cell_stage, upload=_upload(data))
    from django.utils import timezone

    type(load_cell_stage.test).objects.filter(pk=load_cell_stage.test_id).update(
        released_at=timezone.now()
    )
    load_cell_stage.refresh_from_db()
    load_cell_stage.test.refresh_from_db()
    with pytest.raises(ServiceError, match="reported"):
        stage_readings_import(user=cast.technician, stage=load_cell_stage, upload=_upload(data))
    assert not ReadingImport.objects.exists()


@pytest.mark.django_db
def test_a_ring_stage_refuses_a_file_in_newtons_and_takes_divisions(
    cast: Cast, ring_stage: ShearStage
) -> None:
    data = as_bytes(canonical_lines(101))
    record = stage_readings_import(user=cast.technician, stage=ring_stage, upload=_upload(data))
    assert record.state == ImportState.REJECTED
    assert record.errors[0]["column"] == "shear_force_n"
    assert "divisions" in record.errors[0]["reason"]
    layout = imports.import_layout_save(
        user=cast.technician,
        name="Ring logger (div)",
        columns={
            "time": {"column": "time_s", "unit": "s"},
            "horizontal": {"column": "horizontal_displacement_mm", "unit": "mm"},
            "vertical": {"column": "vertical_displacement_mm", "unit": "mm"},
            "force": {"column": "shear_force_n", "unit": "div"},
            "phase": {"column": "phase"},
        },
    )
    record = stage_readings_import(
        user=cast.technician, stage=ring_stage, upload=_upload(data), layout=layout
    )
    assert record.state == ImportState.SUCCEEDED
    columns = shear_columns(ring_stage.pk)
    first = columns.row(0) if len(columns) else None
    assert first is not None and first.force_reading == pytest.approx(80.0)  # raw divisions kept
