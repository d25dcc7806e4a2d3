"""Writing parsed readings: the phases present replace the stage's readings of that phase, inside
the caller's transaction. Shear readings go by binary COPY on PostgreSQL (built column-wise with
numpy) and by batched inserts elsewhere, batch by batch so a failure part-way rolls back whole.
"""

from __future__ import annotations

import struct
from collections.abc import Callable, Iterator
from contextlib import contextmanager

import numpy as np
from django.db import DatabaseError, connection
from django.db.models import Field

from testing.importers.rows import ParsedReadings
from testing.models import ConsolidationReading, ShearReading, ShearStage

BATCH_ROWS = 5000  # rows per bulk_create batch / COPY chunk


def replace_readings(
    stage: ShearStage, parsed: ParsedReadings, *, shear_traverses_only: bool = False
) -> int:
    """Replace the stage's readings of each phase present in ``parsed``; returns rows replaced.

    ``shear_traverses_only``: replace only the shear traverses present in ``parsed`` and keep the
    stage's other traverses (the entry grid enters one traverse at a time)."""
    replaced = 0
    if parsed.consolidation_elapsed_min.size:
        replaced += ConsolidationReading.objects.filter(stage=stage).delete()[0]
        ConsolidationReading.objects.bulk_create(
            [
                ConsolidationReading(stage=stage, elapsed_min=float(t), settlement_mm=float(s))
                for t, s in zip(
                    parsed.consolidation_elapsed_min,
                    parsed.consolidation_settlement_mm,
                    strict=True,
                )
            ],
            batch_size=BATCH_ROWS,
        )
    if parsed.shear_elapsed_min.size:
        old = ShearReading.objects.filter(stage=stage)
        if shear_traverses_only:
            old = old.filter(traverse__in=sorted({int(t) for t in parsed.shear_traverse}))
        replaced += old.delete()[0]
        write_shear_rows(stage.pk, parsed)
    return replaced


ShearWriter = Callable[[ParsedReadings, int, int], None]


def write_shear_rows(stage_id: int, parsed: ParsedReadings) -> None:
    """Write every shear reading, batch by batch, inside the caller's transaction."""
    n = int(parsed.shear_elapsed_min.size)
    with _shear_writer(stage_id) as write:
        for start in range(0, n, BATCH_ROWS):
            _write_shear_batch(write, parsed, start, min(n, start + BATCH_ROWS))


def _write_shear_batch(write: ShearWriter, parsed: ParsedReadings, start: int, stop: int) -> None:
    """One batch (a seam for tests that make the database fail part-way)."""
    write(parsed, start, stop)


@contextmanager
def _shear_writer(stage_id: int) -> Iterator[ShearWriter]:
    if connection.vendor == "postgresql":
        with _copy_writer(stage_id) as write:
            yield write
        return

    def bulk(parsed: ParsedReadings, start: int, stop: int) -> None:
        ShearReading.objects.bulk_create(
            [
                ShearReading(
                    stage_id=stage_id,
                    traverse=int(parsed.shear_traverse[k]),
                    seq=int(parsed.shear_seq[k]),
                    elapsed_min=float(parsed.shear_elapsed_min[k]),
                    horizontal_mm=float(parsed.shear_horizontal_mm[k]),
                    vertical_mm=float(parsed.shear_vertical_mm[k]),
                    force_reading=float(parsed.shear_force[k]),
                )
                for k in range(start, stop)
            ]
        )

    yield bulk


# PostgreSQL binary COPY: 11-byte signature, flags, header-extension length; rows; -1 trailer.
_PGCOPY_HEADER = b"PGCOPY\n\xff\r\n\x00" + struct.pack(">ii", 0, 0)
_PGCOPY_TRAILER = struct.pack(">h", -1)
_ROW_DTYPE = np.dtype(
    [
        ("n", ">i2"),
        ("l_stage", ">i4"), ("stage", ">i8"),
        ("l_traverse", ">i4"), ("traverse", ">i2"),
        ("l_seq", ">i4"), ("seq", ">i4"),
        ("l_t", ">i4"), ("t", ">f8"),
        ("l_h", ">i4"), ("h", ">f8"),
        ("l_v", ">i4"), ("v", ">f8"),
        ("l_f", ">i4"), ("f", ">f8"),
    ]
)  # fmt: skip
_SHEAR_COLUMNS = (
    ("stage", "bigint"),
    ("traverse", "smallint"),
    ("seq", "integer"),
    ("elapsed_min", "double precision"),
    ("horizontal_mm", "double precision"),
    ("vertical_mm", "double precision"),
    ("force_reading", "double precision"),
)


def _binary_rows(stage_id: int, parsed: ParsedReadings, start: int, stop: int) -> bytes:
    """Rows in PostgreSQL's binary COPY format, built column-wise with numpy (no Python loop)."""
    rows = np.empty(stop - start, dtype=_ROW_DTYPE)
    rows["n"] = 7
    rows["l_stage"], rows["stage"] = 8, stage_id
    rows["l_traverse"], rows["traverse"] = 2, parsed.shear_traverse[start:stop]
    rows["l_seq"], rows["seq"] = 4, parsed.shear_seq[start:stop]
    for key, values in (
        ("t", parsed.shear_elapsed_min),
        ("h", parsed.shear_horizontal_mm),
        ("v", parsed.shear_vertical_mm),
        ("f", parsed.shear_force),
    ):
        rows["l_" + key], rows[key] = 8, values[start:stop]
    return rows.tobytes()


@contextmanager
def _copy_writer(stage_id: int) -> Iterator[ShearWriter]:
    meta = ShearReading._meta
    columns = []
    for name, expected in _SHEAR_COLUMNS:
        f = meta.get_field(name)
        assert isinstance(f, Field)
        if f.db_type(connection) != expected:  # the binary layout above depends on these types
            raise DatabaseError(f"Column {name} is {f.db_type(connection)}, expected {expected}")
        columns.append(connection.ops.quote_name(f.column))
    sql = (
        f"COPY {connection.ops.quote_name(meta.db_table)} ({', '.join(columns)}) "
        "FROM STDIN (FORMAT BINARY)"
    )
    # The raw driver's COPY bypasses Django's cursor wrapper, so its errors are translated here:
    # a refused row (a stage that does not exist, a repeated reading number) is an IntegrityError.
    with (
        connection.wrap_database_errors,
        connection.cursor() as cursor,
        cursor.cursor.copy(sql) as copy,
    ):
        copy.write(_PGCOPY_HEADER)

        def write(parsed: ParsedReadings, start: int, stop: int) -> None:
            copy.write(_binary_rows(stage_id, parsed, start, stop))

        yield write
        copy.write(_PGCOPY_TRAILER)
