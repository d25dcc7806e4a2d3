"""Readings that arrive as rows rather than a file: typed on the stage page's entry grid, or sent
to the API as objects. The same row rules as a logger file (``testing.importers.rows``), the same
all-or-nothing rule, and the same write path (``readings_store``), audit row and reduction request.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from django.contrib.auth.models import User
from django.db import transaction

from testing.importers.layout import CANONICAL_LAYOUT, ColumnMap, Layout
from testing.importers.rows import ParsedReadings, RowError, check_force_unit, validate_rows
from testing.models import ImportLayout, ShearStage
from testing.models.audit import ReadingsSource
from testing.services.imports import (
    ReadingsRejected,
    layout_for,
    request_stage_reduction,
    require_open,
    require_technician,
    stage_force_unit,
)
from testing.services.readings_audit import parsed_state, readings_change_record, readings_state
from testing.services.readings_store import replace_readings

_MANUAL_LAYOUT_COLUMNS = {
    "time": ColumnMap("time_min", "min"),
    "horizontal": ColumnMap("horizontal_mm", "mm"),
    "vertical": ColumnMap("vertical_mm", "mm"),
    "phase": ColumnMap("phase"),
    "traverse": ColumnMap("traverse"),
}


def _manual_layout(stage: ShearStage) -> Layout:
    unit = stage_force_unit(stage)
    return Layout(
        name="manual entry",
        columns={**_MANUAL_LAYOUT_COLUMNS, "force": ColumnMap("force", unit)},
    )


def validate_row_objects(
    stage: ShearStage, rows: Sequence[object], layout: Layout = CANONICAL_LAYOUT
) -> ParsedReadings:
    """Check rows given as objects keyed by ``layout``'s column names with the importer's rules
    (the force unit must match the stage's, as for a file). A missing ``phase`` means shear, a
    missing ``traverse`` 1; anything that is not an object is a bad row. Row numbers in errors
    count the rows from 1."""
    result = ParsedReadings()
    check_force_unit(layout, stage_force_unit(stage), result)
    if not result.ok:
        return result
    quantities = list(layout.columns)
    columns = {q: i for i, q in enumerate(quantities)}
    names = [layout.columns[q].column for q in quantities]
    defaults = {"phase": "shear", "traverse": 1}
    cells: list[tuple[int, list[object]]] = []
    for number, row in enumerate(rows, start=1):
        if not isinstance(row, Mapping):
            result.add_error(
                RowError(number, "(row)", str(row)[:60], "a row must be an object of column: value")
            )
            continue
        values: list[object] = []
        for q, name in zip(quantities, names, strict=True):
            value = row.get(name)
            values.append(defaults[q] if value in (None, "") and q in defaults else value)
        cells.append((number, values))
    validate_rows(cells, columns, layout, None, result)
    if result.ok and result.rows_read == 0:
        result.add_error(RowError(1, "(row)", "", "no readings were given"))
    return result


def validate_manual_rows(stage: ShearStage, rows: Sequence[Mapping[str, object]]) -> ParsedReadings:
    """Check grid rows with the importer's rules. Each row: ``phase`` (consolidation/shear,
    default shear), ``time_min``, ``horizontal_mm``, ``vertical_mm`` (upward positive),
    ``force`` (divisions or N, as the stage records) and optionally ``traverse``. Row numbers in
    errors count grid rows from 1."""
    return validate_row_objects(stage, rows, _manual_layout(stage))


def _store_rows(
    *,
    user: User,
    stage: ShearStage,
    rows: Sequence[object],
    layout: Layout,
    source: str,
    reason: str,
    why: str,
    shear_traverses_only: bool = False,
) -> tuple[ParsedReadings, int]:
    """Check ``rows`` (raising :class:`ReadingsRejected` with every bad row, nothing saved), then
    replace the phases given (with ``shear_traverses_only``, only the shear traverses given) in
    one transaction with the audit row and a reduction request. Returns the readings and the
    number of rows replaced."""
    require_technician(user)
    require_open(stage)
    parsed = validate_row_objects(stage, rows, layout)
    if not parsed.ok:
        raise ReadingsRejected(parsed.error_summary, parsed.errors)
    with transaction.atomic():
        locked = ShearStage.objects.select_for_update().get(pk=stage.pk)
        before = readings_state(locked.pk)
        replaced = replace_readings(locked, parsed, shear_traverses_only=shear_traverses_only)
        # Traverses kept beside the new ones: the digest after is read back from the tables.
        after = readings_state(locked.pk) if shear_traverses_only else parsed_state(before, parsed)
        readings_change_record(
            stage=locked,
            user=user,
            source=source,
            before=before,
            after=after,
            reason=reason,
        )
        request_stage_reduction(stage=locked, user=user, reason=why)
    return parsed, replaced


def stage_readings_enter(
    *, user: User, stage: ShearStage, rows: Sequence[Mapping[str, object]], reason: str = ""
) -> tuple[int, int]:
    """Save readings typed on the entry grid; returns the counts (consolidation, shear).

    Consolidation rows replace the stage's consolidation readings; shear rows replace the readings
    of the traverse they name (default 1) and leave the stage's other traverses as they are. A
    traverse beyond the stage's number of traverses is refused. Raises :class:`ReadingsRejected`
    listing every bad row (nothing saved)."""
    beyond = [
        RowError(
            number,
            "traverse",
            str(row.get("traverse")),
            f"this stage has {stage.traverses} traverse(s)",
        )
        for number, row in enumerate(rows, start=1)
        if (row.get("phase") or "shear") == "shear"
        and _int_or_none(row.get("traverse")) not in (None, *range(1, stage.traverses + 1))
    ]
    if beyond:
        raise ReadingsRejected(
            f"{len(beyond)} row(s) name a traverse this stage does not have.", beyond
        )
    parsed, _ = _store_rows(
        user=user,
        stage=stage,
        rows=rows,
        layout=_manual_layout(stage),
        source=ReadingsSource.ENTERED,
        reason=reason,
        why="readings entered by hand",
        shear_traverses_only=True,
    )
    return int(parsed.consolidation_elapsed_min.size), int(parsed.shear_elapsed_min.size)


def _int_or_none(value: object) -> int | None:
    """A typed traverse number; None when blank (the default applies) or not a whole number
    (the row rules then report it)."""
    if value in (None, ""):
        return None
    try:
        number = float(str(value))
    except ValueError:
        return None
    return int(number) if number.is_integer() else None


@dataclass(frozen=True)
class RowsStored:
    consolidation_rows: int
    shear_rows: int
    replaced_rows: int


def stage_readings_rows_import(
    *,
    user: User,
    stage: ShearStage,
    rows: Sequence[object],
    layout: ImportLayout | None = None,
    reason: str = "",
) -> RowsStored:
    """Save readings sent as rows (objects keyed by the layout's column names; the canonical CSV
    layout by default), with the file importer's checks and its all-or-nothing rule: the phases
    given replace the stage's readings of that phase. Raises :class:`ReadingsRejected` listing
    every bad row (nothing saved)."""
    parsed, replaced = _store_rows(
        user=user,
        stage=stage,
        rows=rows,
        layout=layout_for(layout),
        source=ReadingsSource.STORED,
        reason=reason,
        why="readings sent as rows",
    )
    return RowsStored(
        int(parsed.consolidation_elapsed_min.size), int(parsed.shear_elapsed_min.size), replaced
    )


@dataclass(frozen=True)
class ReducedRow:
    """What the grid shows beside a typed row (None where the row cannot be reduced yet)."""

    row: int
    force_n: float | None
    shear_stress_kpa: float | None
    note: str = ""


def manual_rows_reduce(stage: ShearStage, rows: Sequence[Mapping[str, object]]) -> list[ReducedRow]:
    """Force [N] and shear stress on the nominal area [kPa] for each shear row, as typed.

    Uses the stage's force calibration (the certificate if linked, else its factor and zero).
    """
    from testing.analysis import AnalysisError, BoxGeometry
    from testing.services.equipment import stage_force_calibration

    test = stage.test
    box = (
        BoxGeometry.circular(test.box_length_mm)
        if test.box_shape == "circular"
        else BoxGeometry.rectangular(test.box_length_mm, test.box_width_mm or test.box_length_mm)
    )
    calibration = stage_force_calibration(stage)
    out: list[ReducedRow] = []
    for number, row in enumerate(rows, start=1):
        if (row.get("phase") or "shear") != "shear":
            continue
        try:
            reading = float(str(row.get("force")).replace(",", "."))
            force = float(calibration.force_n([reading])[0])
        except (TypeError, ValueError) as exc:
            out.append(
                ReducedRow(
                    number,
                    None,
                    None,
                    str(exc) if isinstance(exc, AnalysisError) else "not a number",
                )
            )
            continue
        out.append(ReducedRow(number, force, 1000.0 * force / box.plan_area_mm2))
    return out
