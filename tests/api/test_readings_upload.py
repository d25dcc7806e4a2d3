"""Readings bulk upload over the API: the canonical CSV as a file or the same readings as JSON rows,
all or nothing, every bad row reported, and only on a stage the caller may change.

Unit references: 1 min = 60 s (SI Brochure, 9th ed., Table 8, non-SI units accepted for use with
the SI). Sign convention: the canonical layout gives vertical displacement upward positive, and a
settlement is a downward movement (common practice in consolidation records), so settlement =
−vertical.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from testing.models import (
    ConsolidationReading,
    ImportState,
    ReadingImport,
    ReadingsChange,
    ShearStage,
)
from testing.selectors_readings import shear_columns, shear_reading_count
from tests.api.conftest import World, token_client
from tests.api.routes import CANONICAL_ROWS, MISSING_ID

CSV = (
    b"time_s,horizontal_displacement_mm,vertical_displacement_mm,shear_force_n,phase\n"
    b"0,,0.000,,consolidation\n"
    b"600,,-0.120,,consolidation\n"
    b"0,0.00,0.000,0,shear\n"
    b"30,0.25,0.010,40,shear\n"
    b"60,0.50,0.020,80,shear\n"
)
# The same file with three bad rows (file rows count from 1 with the header).
BAD_CSV = (
    b"time_s,horizontal_displacement_mm,vertical_displacement_mm,shear_force_n,phase\n"
    b"0,,0.000,,consolidation\n"
    b"600,,-0.120,,consolidation\n"
    b"0,0.00,0.000,0,shear\n"
    b"30,0.25,0.010,forty,shear\n"  # row 5: text in a number column
    b"0,0.50,0.020,80,shear\n"  # row 6: the same time as row 4
    b"90,0.75,0.030,120,shaer\n"  # row 7: unknown phase
)


@pytest.fixture(autouse=True)
def _media(settings: Any, tmp_path: Path) -> None:
    settings.MEDIA_ROOT = tmp_path / "media"


def _url(stage: ShearStage | int) -> str:
    pk = stage if isinstance(stage, int) else stage.pk
    return reverse("api:stage-readings-upload", kwargs={"pk": pk})


def _counts(stage: ShearStage) -> tuple[int, int]:
    return (
        ConsolidationReading.objects.filter(stage=stage).count(),
        shear_reading_count(stage.pk),
    )


def _file(data: bytes, name: str = "logger.csv") -> SimpleUploadedFile:
    return SimpleUploadedFile(name, data, content_type="text/csv")


@pytest.mark.django_db
def test_json_rows_are_stored_in_stored_units(plain_world: World) -> None:
    stage = plain_world.a.open_stage
    client = token_client(plain_world.cast.technician)
    response = client.post(_url(stage), {"rows": CANONICAL_ROWS}, format="json")
    assert response.status_code == 201, response.content
    body = response.json()
    assert body["consolidation_rows"] == 2 and body["shear_rows"] == 4
    assert body["replaced_rows"] == 0 and body["reading_import"] is None
    # 600 s = 10 min (SI Brochure Table 8); settlement = −vertical = 0.12 mm.
    last = ConsolidationReading.objects.filter(stage=stage).order_by("elapsed_min").last()
    assert last is not None
    assert last.elapsed_min == pytest.approx(10.0)
    assert last.settlement_mm == pytest.approx(0.12)
    shear = list(shear_columns(stage.pk).rows())
    assert [r.elapsed_min for r in shear] == pytest.approx([0.0, 0.5, 1.0, 1.5])
    assert [r.force_reading for r in shear] == pytest.approx([0.0, 40.0, 80.0, 120.0])
    assert ReadingsChange.objects.filter(stage=stage, by=plain_world.cast.technician).count() == 1


@pytest.mark.django_db
def test_one_bad_json_row_stores_nothing_and_every_bad_row_is_listed(plain_world: World) -> None:
    stage = plain_world.a.open_stage
    client = token_client(plain_world.cast.technician)
    one_bad = [dict(r) for r in CANONICAL_ROWS]
    one_bad[3]["shear_force_n"] = "n/a"
    response = client.post(_url(stage), {"rows": one_bad}, format="json")
    assert response.status_code == 400, response.content
    body = response.json()
    assert [(r["row"], r["column"]) for r in body["rows"]] == [(4, "shear_force_n")]
    assert body["errors"] == {"rows.4.shear_force_n": ["not a number (value 'n/a')"]}
    assert _counts(stage) == (0, 0)
    assert not ReadingsChange.objects.filter(stage=stage).exists()

    several: list[Any] = [dict(r) for r in CANONICAL_ROWS]
    several[2]["time_s"] = "soon"  # row 3: not a number
    several[5]["time_s"] = 10  # row 6: earlier than row 5 (60 s)
    several.append("not a row")  # row 7: not an object
    response = client.post(_url(stage), {"rows": several}, format="json")
    assert response.status_code == 400, response.content
    listed = {(r["row"], r["column"]) for r in response.json()["rows"]}
    assert listed == {(3, "time_s"), (6, "time_s"), (7, "(row)")}
    assert _counts(stage) == (0, 0)


@pytest.mark.django_db
def test_a_bad_upload_leaves_earlier_readings_exactly_as_they_were(plain_world: World) -> None:
    stage = plain_world.a.open_stage
    client = token_client(plain_world.cast.technician)
    assert client.post(_url(stage), {"rows": CANONICAL_ROWS}, format="json").status_code == 201
    before = list(shear_columns(stage.pk).rows())
    changes = ReadingsChange.objects.filter(stage=stage).count()
    response = client.post(_url(stage), {"file": _file(BAD_CSV)}, format="multipart")
    assert response.status_code == 400, response.content
    assert list(shear_columns(stage.pk).rows()) == before
    assert ReadingsChange.objects.filter(stage=stage).count() == changes


@pytest.mark.django_db
def test_canonical_csv_upload_then_the_same_file_again(plain_world: World) -> None:
    stage = plain_world.a.open_stage
    client = token_client(plain_world.cast.manager)
    response = client.post(_url(stage), {"file": _file(CSV), "reason": "run 1"}, format="multipart")
    assert response.status_code == 201, response.content
    body = response.json()
    assert (body["state"], body["consolidation_rows"], body["shear_rows"]) == ("succeeded", 2, 3)
    record = ReadingImport.objects.get(pk=body["reading_import"])
    assert record.state == ImportState.SUCCEEDED and record.stage_id == stage.pk
    assert _counts(stage) == (2, 3)
    # 30 s = 0.5 min (SI Brochure Table 8).
    times = shear_columns(stage.pk).elapsed_min.tolist()
    assert times == pytest.approx([0.0, 0.5, 1.0])

    again = client.post(_url(stage), {"file": _file(CSV)}, format="multipart")
    assert again.status_code == 200, again.content
    assert again.json()["state"] == "duplicate"
    assert again.json()["duplicate_of"] == record.pk
    assert _counts(stage) == (2, 3)


@pytest.mark.django_db
def test_bad_csv_lists_every_bad_row_with_file_row_numbers(plain_world: World) -> None:
    stage = plain_world.a.open_stage
    client = token_client(plain_world.cast.technician)
    response = client.post(_url(stage), {"file": _file(BAD_CSV)}, format="multipart")
    assert response.status_code == 400, response.content
    body = response.json()
    assert {(r["row"], r["column"]) for r in body["rows"]} == {
        (5, "shear_force_n"),
        (6, "time_s"),
        (7, "phase"),
    }
    assert body["detail"] == "3 bad row(s); nothing was saved."
    assert set(body["errors"]) == {"rows.5.shear_force_n", "rows.6.time_s", "rows.7.phase"}
    assert _counts(stage) == (0, 0)


@pytest.mark.django_db
def test_a_proving_ring_stage_refuses_the_newton_layout(plain_world: World) -> None:
    # A stage recording proving-ring divisions; the canonical layout gives force in N.
    open_ring = plain_world.a.open_stage
    ShearStage.objects.filter(pk=open_ring.pk).update(force_unit="div")
    client = token_client(plain_world.cast.technician)
    response = client.post(_url(open_ring), {"rows": CANONICAL_ROWS}, format="json")
    assert response.status_code == 400, response.content
    [problem] = response.json()["rows"]
    assert problem["column"] == "shear_force_n"
    assert "divisions" in problem["reason"]
    assert _counts(open_ring) == (0, 0)


@pytest.mark.django_db
def test_no_upload_once_the_set_is_reported_or_by_a_checker(plain_world: World) -> None:
    reported = plain_world.a.stage  # its test set was released by a report
    before = _counts(reported)
    technician = token_client(plain_world.cast.technician)
    response = technician.post(_url(reported), {"rows": CANONICAL_ROWS}, format="json")
    assert response.status_code == 400
    assert "reported" in response.json()["detail"]
    assert _counts(reported) == before

    checker = token_client(plain_world.cast.checker)
    response = checker.post(_url(plain_world.a.open_stage), {"rows": CANONICAL_ROWS}, format="json")
    assert response.status_code == 403
    assert _counts(plain_world.a.open_stage) == (0, 0)


@pytest.mark.django_db
def test_client_b_can_neither_upload_to_nor_see_client_a_stage(plain_world: World) -> None:
    stage = plain_world.a.open_stage
    client_b = token_client(plain_world.cast.client_b)
    as_json = client_b.post(_url(stage), {"rows": CANONICAL_ROWS}, format="json")
    missing = client_b.post(_url(MISSING_ID), {"rows": CANONICAL_ROWS}, format="json")
    assert as_json.status_code == missing.status_code == 403
    assert as_json.content == missing.content
    as_file = client_b.post(_url(stage), {"file": _file(CSV)}, format="multipart")
    assert as_file.status_code == 403
    assert _counts(stage) == (0, 0)
    assert not ReadingImport.objects.filter(stage=stage).exists()
    # Reading: A's stage answers B exactly like a stage that does not exist.
    detail = client_b.get(reverse("api:stage-detail", kwargs={"pk": stage.pk}))
    absent = client_b.get(reverse("api:stage-detail", kwargs={"pk": MISSING_ID}))
    assert detail.status_code == absent.status_code == 404
    assert detail.content == absent.content


@pytest.mark.django_db
def test_neither_or_a_malformed_body_is_a_field_error(plain_world: World) -> None:
    client = token_client(plain_world.cast.technician)
    url = _url(plain_world.a.open_stage)
    assert client.post(url, {}, format="json").json()["errors"] == {
        "rows": ["This field is required."]
    }
    assert "file" in client.post(url, {"reason": "x"}, format="multipart").json()["errors"]
    assert client.post(url, {"rows": []}, format="json").status_code == 400


@pytest.mark.django_db
def test_a_saved_layout_names_the_columns_of_json_rows(plain_world: World) -> None:
    from testing.services.imports import import_layout_save

    stage = plain_world.a.open_stage
    ShearStage.objects.filter(pk=stage.pk).update(force_unit="div")  # a proving-ring stage
    layout = import_layout_save(
        user=plain_world.cast.technician,
        name="Ring logger",
        columns={
            "time": {"column": "t", "unit": "min"},
            "horizontal": {"column": "dx", "unit": "mm"},
            "vertical": {"column": "dy", "unit": "mm"},
            "force": {"column": "ring", "unit": "div"},
        },
    )
    rows = [{"t": 0.5 * i, "dx": 0.2 * i, "dy": 0.0, "ring": 12 * i} for i in range(5)]
    client = token_client(plain_world.cast.technician)
    url = _url(stage)
    response = client.post(url, {"rows": rows, "layout": layout.pk}, format="json")
    assert response.status_code == 201, response.content
    forces = shear_columns(stage.pk).force_reading.tolist()
    assert forces == pytest.approx([0.0, 12.0, 24.0, 36.0, 48.0])  # divisions
    # An id beyond any database integer is a field error, not a server error.
    huge = client.post(url, {"rows": rows, "layout": 10**30}, format="json")
    assert huge.status_code == 400
    assert "layout" in huge.json()["errors"]
