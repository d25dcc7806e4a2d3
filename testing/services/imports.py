"""Readings in: logger uploads and manual entry, each in one transaction, each asking for a
stage reduction in that same transaction.

An upload goes: size cap (before reading a byte more than the cap) → sha256 → duplicate check
(same file, same stage → nothing added, the earlier import named) → the original stored under a
generated name → parse and check every row (``testing.importers``) → all rows written in one
transaction (COPY on PostgreSQL, batched inserts elsewhere) → reduction requested. Any bad row
saves nothing and lists every bad row; a database failure part-way saves nothing and marks the
import failed with the reason, so a retry starts clean.
"""

from __future__ import annotations

import hashlib
import logging
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import PurePosixPath
from typing import Any, Protocol

from django.conf import settings
from django.contrib.auth.models import User
from django.core.files.base import ContentFile
from django.db import DatabaseError, connection, transaction
from django.utils import timezone

from testing import access
from testing.importers.layout import CANONICAL_LAYOUT, ColumnMap, Layout, LayoutError
from testing.importers.readings import (
    ParsedReadings,
    Preview,
    RowError,
    check_force_unit,
    parse_readings,
    preview_readings,
)
from testing.importers.rows import validate_rows
from testing.importers.xlsx import UnsafeSpreadsheet, check_archive, is_xlsx
from testing.models import (
    ForceUnit,
    ImportLayout,
    ImportState,
    ReadingImport,
    ShearStage,
)
from testing.models.audit import ReadingsSource, acting
from testing.services.errors import NotAllowed, ServiceError
from testing.services.readings_audit import parsed_state, readings_change_record, readings_state
from testing.services.readings_store import replace_readings

log = logging.getLogger(__name__)


class UploadTooLarge(ServiceError):
    """The upload is over the size cap; it was not stored or parsed."""


class ReadingsRejected(ServiceError):
    """Manual rows with problems; ``errors`` lists every one, and nothing was saved."""

    def __init__(self, message: str, errors: list[RowError]) -> None:
        super().__init__(message)
        self.errors = errors


class Upload(Protocol):
    """What the service needs of an upload: Django's ``UploadedFile`` and ``File`` qualify."""

    name: str | None

    def read(self, size: int = ..., /) -> bytes: ...


def max_upload_bytes() -> int:
    return int(settings.TAULINE_MAX_UPLOAD_BYTES)


def _max_unpacked_bytes() -> int:
    # An XLSX of numbers unpacks to roughly 5–20× its size; allow 20× the upload cap.
    return 20 * max_upload_bytes()


def _require_technician(user: User) -> None:
    if not access.can_enter_readings(user):
        raise NotAllowed("Only technicians and the lab manager can enter or import readings.")


def _require_open(stage: ShearStage) -> None:
    if stage.test.released_at is not None:
        raise ServiceError("This test set has been reported; its readings cannot change.")


def display_name(filename: str | None) -> str:
    """The uploaded name reduced to its last part, printable, for display only."""
    base = PurePosixPath((filename or "upload").replace("\\", "/")).name
    clean = "".join(ch for ch in base if ch.isprintable()).strip()
    if clean in {"", ".", ".."}:
        clean = "upload"
    return clean[:200]


_TEXT_SUFFIXES = (".csv", ".txt", ".dat", ".tsv")


def _refuse_misnamed(data: bytes, filename: str) -> None:
    """A text-named file that is really a workbook (zip) is refused; the reverse is refused by
    the archive check ("not a valid XLSX workbook")."""
    if filename.lower().endswith(_TEXT_SUFFIXES) and data[:4] == b"PK\x03\x04":
        raise UnsafeSpreadsheet(
            f"{display_name(filename)} is named as a text file but is a zip archive (a workbook?). "
            "Save it with its real extension (.xlsx) and upload it again. Nothing was saved."
        )


def _read_capped(upload: Upload) -> bytes:
    """Read the upload, refusing it as soon as it is known to be over the cap."""
    cap = max_upload_bytes()
    size = getattr(upload, "size", None)
    if isinstance(size, int) and size > cap:
        raise UploadTooLarge(
            f"The file is {size} bytes; the limit is {cap} bytes. Nothing was saved."
        )
    if hasattr(upload, "seek"):
        upload.seek(0)
    data = upload.read(cap + 1)
    if len(data) > cap:
        raise UploadTooLarge(f"The file is over the limit of {cap} bytes. Nothing was saved.")
    return data


def layout_for(layout: ImportLayout | None) -> Layout:
    """The parser's layout for a saved layout (None = the canonical CSV layout)."""
    if layout is None:
        return CANONICAL_LAYOUT
    data = {
        "columns": layout.columns,
        "delimiter": layout.delimiter,
        "decimal_comma": layout.decimal_comma,
        "header_row": layout.header_row,
        "sheet_name": layout.sheet_name,
        "phase_values": layout.phase_values,
        "vertical_sign": layout.vertical_sign,
        "rebase_each_phase": layout.rebase_each_phase,
    }
    try:
        return Layout.from_mapping(layout.name, data)
    except LayoutError as exc:
        raise ServiceError(str(exc)) from exc


def import_layout_save(
    *, user: User, name: str, columns: Mapping[str, Any], **options: Any
) -> ImportLayout:
    """Save a reusable column mapping for the lab; it must make a usable layout."""
    _require_technician(user)
    try:
        Layout.from_mapping(name, {"columns": columns, **options})
    except LayoutError as exc:
        raise ServiceError(str(exc)) from exc
    row, _ = ImportLayout.objects.update_or_create(
        name=name, defaults={"columns": dict(columns), "created_by": user, **options}
    )
    return row


def request_stage_reduction(*, stage: ShearStage, user: User | None, reason: str) -> None:
    """Ask for the stage to be reduced again; the run is queued on commit of the caller's transaction."""
    from testing.services.computation import stage_reduction_request

    stage_reduction_request(stage=stage, user=user, reason=reason)


def _stage_force_unit(stage: ShearStage) -> str:
    return "div" if stage.force_unit == ForceUnit.DIVISIONS else "N"


# --- preview ------------------------------------------------------------------------------------


def stage_readings_preview(
    *,
    user: User,
    stage: ShearStage,
    upload: Upload,
    layout: ImportLayout | None = None,
    n: int = 10,
) -> Preview:
    """The header, the detected columns and the first rows; saves nothing."""
    _require_technician(user)
    data = _read_capped(upload)
    try:
        _refuse_misnamed(data, upload.name or "")
        if is_xlsx(data, upload.name or ""):
            check_archive(data, max_uncompressed_bytes=_max_unpacked_bytes())
        return preview_readings(
            data,
            filename=upload.name or "",
            layout=layout_for(layout),
            n=n,
            max_uncompressed_bytes=_max_unpacked_bytes(),
        )
    except UnsafeSpreadsheet as exc:
        raise ServiceError(str(exc)) from exc


# --- import -------------------------------------------------------------------------------------


def stage_readings_import(
    *,
    user: User,
    stage: ShearStage,
    upload: Upload,
    layout: ImportLayout | None = None,
    reason: str = "",
) -> ReadingImport:
    """Import one logger file into a stage. Returns the import record; look at its ``state``:

    - ``succeeded``: readings saved (phases in the file replace the stage's readings of that phase);
    - ``duplicate``: the same file was already imported for this stage (``duplicate_of``); 0 added;
    - ``rejected``: bad rows (``errors``: row, column, value, reason); 0 saved;
    - ``failed``: the database failed part-way (``reason``); 0 saved; importing again is safe.

    Raises :class:`UploadTooLarge` (nothing stored) and ``ServiceError`` for refusals.
    """
    _require_technician(user)
    _require_open(stage)
    parser_layout = layout_for(layout)
    data = _read_capped(upload)
    digest = hashlib.sha256(data).hexdigest()
    name = display_name(upload.name)

    earlier = (
        ReadingImport.objects.filter(stage=stage, sha256=digest, state=ImportState.SUCCEEDED)
        .order_by("-uploaded_at", "-id")
        .first()
    )
    if earlier is not None:
        return ReadingImport.objects.create(
            stage=stage,
            layout=layout,
            layout_snapshot=parser_layout.snapshot(),
            original_file=earlier.original_file.name,
            original_name=name,
            size_bytes=len(data),
            sha256=digest,
            state=ImportState.DUPLICATE,
            duplicate_of=earlier,
            reason=(
                f"The same file (sha256 {digest[:12]}…) was already imported into this stage as "
                f"import #{earlier.pk}, {earlier.original_name}, on "
                f"{timezone.localtime(earlier.uploaded_at):%Y-%m-%d %H:%M}. Nothing was added."
            ),
            uploaded_by=user,
            finished_at=timezone.now(),
        )

    record = ReadingImport(
        stage=stage,
        layout=layout,
        layout_snapshot=parser_layout.snapshot(),
        original_name=name,
        size_bytes=len(data),
        sha256=digest,
        uploaded_by=user,
    )
    # The original is stored (and the record committed) before parsing, so even a file that
    # breaks the parser is kept with its hash.
    record.original_file.save(name, ContentFile(data), save=False)
    record.save()

    try:
        _refuse_misnamed(data, name)
        if is_xlsx(data, name):
            check_archive(data, max_uncompressed_bytes=_max_unpacked_bytes())
        parsed = parse_readings(
            data,
            filename=name,
            layout=parser_layout,
            stage_force_unit=_stage_force_unit(stage),
            max_uncompressed_bytes=_max_unpacked_bytes(),
        )
    except UnsafeSpreadsheet as exc:
        _finish(record, ImportState.REJECTED, reason=str(exc))
        return record
    if not parsed.ok:
        _finish(
            record,
            ImportState.REJECTED,
            reason=parsed.error_summary,
            errors=[e.as_dict() for e in parsed.errors],
        )
        return record

    try:
        with transaction.atomic():
            locked = ShearStage.objects.select_for_update().get(pk=stage.pk)
            before = readings_state(locked.pk)
            replaced = replace_readings(locked, parsed)
            superseded = ReadingImport.objects.filter(
                stage=stage, state=ImportState.SUCCEEDED
            ).exclude(pk=record.pk)
            superseded.update(state=ImportState.SUPERSEDED)
            record.state = ImportState.SUCCEEDED
            record.consolidation_rows = int(parsed.consolidation_elapsed_min.size)
            record.shear_rows = int(parsed.shear_elapsed_min.size)
            record.replaced_rows = replaced
            record.finished_at = timezone.now()
            record.save(
                update_fields=[
                    "state",
                    "consolidation_rows",
                    "shear_rows",
                    "replaced_rows",
                    "finished_at",
                ]
            )
            readings_change_record(
                stage=locked,
                user=user,
                source=ReadingsSource.IMPORTED,
                before=before,
                after=parsed_state(before, parsed),
                reason=reason,
                reading_import=record,
            )
            request_stage_reduction(stage=locked, user=user, reason="readings imported")
    except DatabaseError as exc:
        _mark_failed(record, exc)
        return record
    return record


def _finish(
    record: ReadingImport, state: str, *, reason: str, errors: list[dict[str, Any]] | None = None
) -> None:
    record.state = state
    record.reason = reason
    record.errors = errors or []
    record.finished_at = timezone.now()
    record.save(update_fields=["state", "reason", "errors", "finished_at"])


def _mark_failed(record: ReadingImport, exc: Exception) -> None:
    """Record why the write failed; the readings were rolled back with the transaction."""
    reason = (
        f"The database failed while saving the readings ({type(exc).__name__}: "
        f"{str(exc).strip()[:300]}). Nothing was saved; import the file again."
    )
    try:
        if not connection.in_atomic_block and not connection.is_usable():
            connection.close()  # the next query opens a fresh connection
        ReadingImport.objects.filter(pk=record.pk).update(
            state=ImportState.FAILED, reason=reason, finished_at=timezone.now()
        )
        record.state, record.reason = ImportState.FAILED, reason
    except DatabaseError:
        log.exception("Import %s failed and could not be marked failed", record.pk)
        record.state, record.reason = ImportState.FAILED, reason


# --- manual entry -------------------------------------------------------------------------------

_MANUAL_LAYOUT_COLUMNS = {
    "time": ColumnMap("time_min", "min"),
    "horizontal": ColumnMap("horizontal_mm", "mm"),
    "vertical": ColumnMap("vertical_mm", "mm"),
    "phase": ColumnMap("phase"),
    "traverse": ColumnMap("traverse"),
}


def _manual_layout(stage: ShearStage) -> Layout:
    unit = _stage_force_unit(stage)
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
    check_force_unit(layout, _stage_force_unit(stage), result)
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
) -> tuple[ParsedReadings, int]:
    """Check ``rows`` (raising :class:`ReadingsRejected` with every bad row, nothing saved), then
    replace the phases given in one transaction with the audit row and a reduction request.
    Returns the readings and the number of rows replaced."""
    _require_technician(user)
    _require_open(stage)
    parsed = validate_row_objects(stage, rows, layout)
    if not parsed.ok:
        raise ReadingsRejected(parsed.error_summary, parsed.errors)
    with transaction.atomic():
        locked = ShearStage.objects.select_for_update().get(pk=stage.pk)
        before = readings_state(locked.pk)
        replaced = replace_readings(locked, parsed)
        readings_change_record(
            stage=locked,
            user=user,
            source=source,
            before=before,
            after=parsed_state(before, parsed),
            reason=reason,
        )
        request_stage_reduction(stage=locked, user=user, reason=why)
    return parsed, replaced


def stage_readings_enter(
    *, user: User, stage: ShearStage, rows: Sequence[Mapping[str, object]], reason: str = ""
) -> tuple[int, int]:
    """Save readings typed on the entry grid, replacing the phases entered; returns the counts
    (consolidation, shear). Raises :class:`ReadingsRejected` listing every bad row (nothing saved)."""
    parsed, _ = _store_rows(
        user=user,
        stage=stage,
        rows=rows,
        layout=_manual_layout(stage),
        source=ReadingsSource.ENTERED,
        reason=reason,
        why="readings entered by hand",
    )
    return int(parsed.consolidation_elapsed_min.size), int(parsed.shear_elapsed_min.size)


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


# --- AGS4 import --------------------------------------------------------------------------------


def ags_import_preview(*, user: User, project: Any, data: bytes) -> Any:
    """The validation report of an AGS4 file against ``project``; saves nothing."""
    from testing.importers.ags import plan_ags_import

    if not access.can_receive_samples(user):
        raise NotAllowed("Only technicians and the lab manager can import AGS4 files.")
    if len(data) > max_upload_bytes():
        raise UploadTooLarge(f"The file is over the limit of {max_upload_bytes()} bytes.")
    return plan_ags_import(data, project=project, own_lab_name=settings.TAULINE_LAB_NAME)


def ags_import_apply(*, user: User, project: Any, data: bytes, filename: str) -> Any:
    """Import an AGS4 file's locations, samples and other labs' shear box results into
    ``project`` in one transaction — only if its report has no errors (else ``ServiceError``
    carrying the report). Returns the plan that was carried out."""
    from decimal import Decimal

    from testing.models import Borehole, ImportedShearTest, Sample
    from testing.services.records import sample_receive

    plan = ags_import_preview(user=user, project=project, data=data)
    if not plan.ok:
        raise ServiceError("The AGS4 file was not imported:\n" + plan.report())
    digest = hashlib.sha256(data).hexdigest()
    with transaction.atomic(), acting(user, f"AGS4 import of {display_name(filename)}"):
        for fields in plan.new_boreholes:
            Borehole.objects.create(project=project, **fields)
        boreholes = {b.reference: b for b in Borehole.objects.filter(project=project)}
        samples: dict[tuple[str, str], Sample] = {}
        for s in plan.samples:
            bh = boreholes[s.loca_id]
            found = Sample.objects.filter(borehole=bh, reference=s.reference).first()
            if found is None:
                found = sample_receive(
                    user=user,
                    borehole=bh,
                    reference=s.reference,
                    depth_top_m=Decimal(s.depth_top_m),
                    depth_base_m=Decimal(s.depth_base_m),
                    sample_type=s.sample_type,
                    description=s.description,
                    condition_on_receipt=f"Record imported from AGS4 file {display_name(filename)}",
                )
            samples[(s.loca_id, s.reference)] = found
        for t in plan.shear_tests:
            ImportedShearTest.objects.update_or_create(
                sample=samples[t.sample_key],
                specimen_reference=t.specimen_reference,
                specimen_depth_m=t.specimen_depth_m,
                source_lab=t.source_lab,
                defaults={
                    "source_file_name": display_name(filename),
                    "source_sha256": digest,
                    "method": t.method,
                    "test_type": t.test_type,
                    "condition": t.condition,
                    "peak_cohesion_kpa": t.peak_cohesion_kpa,
                    "peak_friction_angle_deg": t.peak_friction_angle_deg,
                    "residual_cohesion_kpa": t.residual_cohesion_kpa,
                    "residual_friction_angle_deg": t.residual_friction_angle_deg,
                    "remarks": t.remarks,
                    "stages": t.stages,
                    "imported_by": user,
                },
            )
    return plan
