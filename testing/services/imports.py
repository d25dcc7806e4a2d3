"""Readings in: logger uploads and manual entry, each in one transaction, each asking for a
stage reduction in that same transaction.

An upload goes: size cap (before reading a byte more than the cap) → sha256 → duplicate check
(same file, same stage → nothing added, the earlier import named) → the original stored under a
generated name → parse and check every row (``testing.importers``) → all rows written in one
transaction (as column blocks: a million readings are 20 inserts) → reduction requested. Any bad row
saves nothing and lists every bad row; a database failure part-way saves nothing and marks the
import failed with the reason, so a retry starts clean.
"""

from __future__ import annotations

import hashlib
import logging
from collections.abc import Mapping
from pathlib import PurePosixPath
from typing import Any, Protocol

from django.conf import settings
from django.contrib.auth.models import User
from django.core.files.base import ContentFile
from django.db import DatabaseError, connection, transaction
from django.utils import timezone

from testing import access
from testing.importers.layout import CANONICAL_LAYOUT, Layout, LayoutError
from testing.importers.readings import (
    Preview,
    RowError,
    parse_readings,
    preview_readings,
)
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


def require_technician(user: User) -> None:
    if not access.can_enter_readings(user):
        raise NotAllowed("Only technicians and the lab manager can enter or import readings.")


def require_open(stage: ShearStage) -> None:
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
    require_technician(user)
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


def stage_force_unit(stage: ShearStage) -> str:
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
    require_technician(user)
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
    require_technician(user)
    require_open(stage)
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
            stage_force_unit=stage_force_unit(stage),
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
