"""Logger workbooks (XLSX) through a saved layout in US customary units, and readings typed on the
entry grid from dial gauges, checked against unit definitions and hand arithmetic.

Sources named beside each check:
- 1 in = 25.4 mm exactly and 1 lbf = 4.4482216152605 N exactly: NIST SP 811, Appendix B.
- Shear force from a proving ring = dial divisions × ring constant [N/div], and nominal shear stress
  τ = F / A with A the box's plan area: BS 1377-7 and ASTM D3080 (reduction of readings).
"""

from __future__ import annotations

import io

import numpy as np
import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from openpyxl import Workbook

from testing.models import ConsolidationReading, ImportLayout, ShearStage
from testing.selectors_readings import shear_columns, shear_reading_count
from testing.services.imports import ReadingsRejected, import_layout_save, stage_readings_import
from testing.services.readings_entry import manual_rows_reduce, stage_readings_enter
from tests.conftest import Cast

INCH_MM = 25.4  # NIST SP 811, App. B (exact)
LBF_N = 4.4482216152605  # NIST SP 811, App. B (exact)

# An invented logger export: time in minutes, displacements in inches, force in lbf, with a
# title row above the header (header on row 3) and the vertical gauge counting settlement positive.
HEADER = ["Elapsed (min)", "Horiz. disp (in)", "Vert. disp (in)", "Shear load (lbf)", "Stage"]


def _workbook(rows: list[list[object]], sheet: str = "Run 1") -> bytes:
    book = Workbook()
    ws = book.active
    assert ws is not None
    ws.title = sheet
    ws.append(["Invented logger export, rig 2"])
    ws.append([])
    ws.append(HEADER)
    for row in rows:
        ws.append(row)
    out = io.BytesIO()
    book.save(out)
    return out.getvalue()


def _us_layout(cast: Cast) -> ImportLayout:
    return import_layout_save(
        user=cast.technician,
        name="Rig 2 workbook (in, lbf, min)",
        columns={
            "time": {"column": "Elapsed (min)", "unit": "min"},
            "horizontal": {"column": "Horiz. disp (in)", "unit": "in"},
            "vertical": {"column": "Vert. disp (in)", "unit": "in"},
            "force": {"column": "Shear load (lbf)", "unit": "lbf"},
            "phase": {"column": "Stage"},
        },
        header_row=3,
        sheet_name="Run 1",
        phase_values={"CONS": "consolidation", "SHEAR": "shear"},
        vertical_sign=-1,
    )


def _shear_rows(n: int) -> list[list[object]]:
    return [[0.5 * i, 0.002 * i, 0.0001 * i, 10.0 + 0.25 * i, "SHEAR"] for i in range(n)]


@pytest.mark.django_db
def test_an_xlsx_in_inches_and_lbf_is_stored_in_mm_and_newtons(
    cast: Cast, load_cell_stage: ShearStage
) -> None:
    cons: list[list[object]] = [
        [t, None, 0.0005 * k, None, "CONS"] for k, t in enumerate([0.0, 1.0, 4.0, 9.0])
    ]
    shear = _shear_rows(40)
    data = _workbook(cons + shear)
    record = stage_readings_import(
        user=cast.technician,
        stage=load_cell_stage,
        upload=SimpleUploadedFile("rig2.xlsx", data),
        layout=_us_layout(cast),
    )
    assert record.state == "succeeded", (record.reason, record.errors[:3])
    assert (record.consolidation_rows, record.shear_rows) == (4, 40)

    stored = shear_columns(load_cell_stage.pk)
    got = np.column_stack(
        [stored.elapsed_min, stored.horizontal_mm, stored.vertical_mm, stored.force_reading]
    )
    sent = np.array([row[:4] for row in shear], dtype=float)
    np.testing.assert_allclose(got[:, 0], sent[:, 0], rtol=1e-12)  # already minutes
    np.testing.assert_allclose(got[:, 1], sent[:, 1] * INCH_MM, rtol=1e-12)
    # The layout says the gauge reads settlement positive; stored values are upward positive.
    np.testing.assert_allclose(got[:, 2], -sent[:, 2] * INCH_MM, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(got[:, 3], sent[:, 3] * LBF_N, rtol=1e-12)
    # Consolidation: the gauge reads settlement positive and so does the stored settlement
    # (compression positive), in mm.
    cons_stored = np.array(
        ConsolidationReading.objects.filter(stage=load_cell_stage)
        .order_by("elapsed_min")
        .values_list("elapsed_min", "settlement_mm")
    )
    np.testing.assert_allclose(cons_stored[:, 0], [0.0, 1.0, 4.0, 9.0])
    np.testing.assert_allclose(cons_stored[:, 1], [0.0005 * k * INCH_MM for k in range(4)])


@pytest.mark.django_db
def test_an_xlsx_with_bad_cells_saves_nothing_and_names_each_row_and_column(
    cast: Cast, load_cell_stage: ShearStage
) -> None:
    rows = _shear_rows(30)
    rows[4][3] = "jammed"  # text in the force column
    rows[11][1] = None  # a shear row without horizontal displacement
    rows[20][0] = -3.0  # negative time
    record = stage_readings_import(
        user=cast.technician,
        stage=load_cell_stage,
        upload=SimpleUploadedFile("rig2-bad.xlsx", _workbook(rows)),
        layout=_us_layout(cast),
    )
    assert record.state == "rejected"
    assert shear_reading_count(load_cell_stage.pk) == 0
    # Sheet rows: title (1), blank (2), header (3), so data row i is sheet row i + 4.
    found = {(e["row"], e["column"]) for e in record.errors}
    assert (4 + 4, "Shear load (lbf)") in found
    assert (11 + 4, "Horiz. disp (in)") in found
    assert (20 + 4, "Elapsed (min)") in found
    assert len(record.errors) == 3, record.errors


@pytest.mark.django_db
def test_an_xlsx_without_the_layouts_sheet_is_refused_with_the_sheet_named(
    cast: Cast, load_cell_stage: ShearStage
) -> None:
    record = stage_readings_import(
        user=cast.technician,
        stage=load_cell_stage,
        upload=SimpleUploadedFile("other.xlsx", _workbook(_shear_rows(5), sheet="Summary")),
        layout=_us_layout(cast),
    )
    assert record.state == "rejected"
    assert "Run 1" in (record.reason + " ".join(str(e) for e in record.errors))
    assert shear_reading_count(load_cell_stage.pk) == 0


# --- Manual entry from dial gauges ---------------------------------------------------------------

RING_CONSTANT_N_PER_DIV = 1.52  # the ring_stage fixture's factor (invented ring)
BOX_AREA_MM2 = 60.0 * 60.0  # the fixture's 60 mm square box


def _grid() -> list[dict[str, object]]:
    cons = [
        {"phase": "consolidation", "time_min": t, "vertical_mm": -0.01 * k}
        for k, t in enumerate([0, 0.25, 1, 4, 16])
    ]
    shear = [
        {
            "phase": "shear",
            "time_min": 0.5 * i,
            "horizontal_mm": 0.1 * i,
            "vertical_mm": 0.002 * i,
            "force": 4 * i,
        }
        for i in range(25)
    ]
    return cons + shear


@pytest.mark.django_db
def test_grid_rows_reduce_to_force_and_stress_as_typed(cast: Cast, ring_stage: ShearStage) -> None:
    grid = _grid()
    reduced = manual_rows_reduce(ring_stage, grid)
    shear = [row for row in grid if row["phase"] == "shear"]
    assert len(reduced) == len(shear)
    for row, out in zip(shear, reduced, strict=True):
        force = float(row["force"]) * RING_CONSTANT_N_PER_DIV  # type: ignore[arg-type]
        assert out.force_n == pytest.approx(force, rel=1e-12)
        # τ [kPa] = F [N] / A [mm²] × 1000 (N/mm² = MPa).
        assert out.shear_stress_kpa == pytest.approx(1000.0 * force / BOX_AREA_MM2, rel=1e-12)


@pytest.mark.django_db
def test_a_grid_row_that_is_not_a_number_shows_a_note_not_a_value(ring_stage: ShearStage) -> None:
    out = manual_rows_reduce(ring_stage, [{"phase": "shear", "time_min": 0, "force": "4o"}])
    assert out[0].force_n is None
    assert out[0].shear_stress_kpa is None
    assert out[0].note


@pytest.mark.django_db
def test_grid_entry_stores_both_phases_and_replaces_them_when_entered_again(
    cast: Cast, ring_stage: ShearStage
) -> None:
    counts = stage_readings_enter(user=cast.technician, stage=ring_stage, rows=_grid())
    assert counts == (5, 25)
    forces = shear_columns(ring_stage.pk).force_reading.tolist()
    assert forces == [4.0 * i for i in range(25)]  # divisions kept raw; the calibration converts
    # Entering the shear phase again replaces it and leaves the consolidation rows alone.
    again = [row for row in _grid() if row["phase"] == "shear"][:10]
    assert stage_readings_enter(user=cast.technician, stage=ring_stage, rows=again) == (0, 10)
    assert shear_reading_count(ring_stage.pk) == 10
    assert ConsolidationReading.objects.filter(stage=ring_stage).count() == 5


@pytest.mark.django_db
def test_grid_entry_with_bad_rows_saves_nothing_and_lists_each(
    cast: Cast, ring_stage: ShearStage
) -> None:
    grid = _grid()
    grid[7]["force"] = "n/a"
    grid[12]["time_min"] = -1
    with pytest.raises(ReadingsRejected) as caught:
        stage_readings_enter(user=cast.technician, stage=ring_stage, rows=grid)
    assert sorted(e.row for e in caught.value.errors) == [8, 13]  # grid rows count from 1
    assert shear_reading_count(ring_stage.pk) == 0
    assert ConsolidationReading.objects.filter(stage=ring_stage).count() == 0
