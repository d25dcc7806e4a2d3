"""Writing parsed readings: the phases present replace the stage's readings of that phase, inside
the caller's transaction, so a failure part-way rolls back whole. Shear readings go in as column
blocks (:class:`~testing.models.ShearReadingBlock`), block by block.
"""

from __future__ import annotations

from collections.abc import Callable
from itertools import pairwise
from typing import Any

import numpy as np
from django.db import IntegrityError, connection

from testing.importers.rows import ParsedReadings
from testing.models import ConsolidationReading, ShearReadingBlock, ShearStage
from testing.selectors_readings import ShearColumns

BATCH_ROWS = 5000  # consolidation rows per bulk_create batch
BLOCK_READINGS = 50_000  # shear readings per block row (400 kB per column)


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
        old = ShearReadingBlock.objects.filter(stage=stage)
        if shear_traverses_only:
            old = old.filter(traverse__in=sorted({int(t) for t in parsed.shear_traverse}))
        replaced += int(sum(old.values_list("count", flat=True)))
        old.delete()
        write_shear_rows(stage.pk, parsed)
    return replaced


ShearWriter = Callable[[ShearColumns, int, int], None]


def write_shear_rows(stage_id: int, parsed: ParsedReadings) -> None:
    """Write the parsed shear readings as column blocks, inside the caller's transaction."""
    write_shear_columns(
        stage_id,
        ShearColumns(
            traverse=parsed.shear_traverse,
            seq=parsed.shear_seq,
            elapsed_min=parsed.shear_elapsed_min,
            horizontal_mm=parsed.shear_horizontal_mm,
            vertical_mm=parsed.shear_vertical_mm,
            force_reading=parsed.shear_force,
        ),
    )


def write_shear_columns(stage_id: int, columns: ShearColumns) -> None:
    """Write readings as column blocks, inside the caller's transaction.

    Readings are put in (traverse, reading number) order; each run of consecutive reading numbers
    of one traverse is cut into blocks of at most ``BLOCK_READINGS``, one row each, so a million
    readings are a few dozen inserts. A reading number given twice in a traverse is refused
    (``IntegrityError``, nothing written by this call)."""
    tr, sq = np.asarray(columns.traverse, np.int64), np.asarray(columns.seq, np.int64)
    if tr.size == 0:
        return
    if ((tr < 1) | (sq < 1)).any():
        raise IntegrityError("traverse and reading numbers count from 1")
    d_tr, d_sq = np.diff(tr), np.diff(sq)
    if not ((d_tr > 0) | ((d_tr == 0) & (d_sq > 0))).all():
        order = np.lexsort((sq, tr))
        columns = columns.take(order)
        tr, sq = tr[order], sq[order]
        d_tr, d_sq = np.diff(tr), np.diff(sq)
    repeated = np.flatnonzero((d_tr == 0) & (d_sq == 0))
    if repeated.size:
        k = int(repeated[0]) + 1
        raise IntegrityError(f"reading {int(sq[k])} of traverse {int(tr[k])} is given twice")
    cuts = [0, *(int(k) + 1 for k in np.flatnonzero((d_tr != 0) | (d_sq != 1))), int(tr.size)]
    write = _insert_block(stage_id)
    for run_start, run_stop in pairwise(cuts):
        for start in range(run_start, run_stop, BLOCK_READINGS):
            _write_shear_batch(write, columns, start, min(run_stop, start + BLOCK_READINGS))


def _write_shear_batch(write: ShearWriter, columns: ShearColumns, start: int, stop: int) -> None:
    """One block (a seam for tests that make the database fail part-way)."""
    write(columns, start, stop)


# One block row; the names are checked against the model by tests/testing/test_reading_blocks.py.
INSERT_BLOCK_SQL = (
    'INSERT INTO "testing_shearreadingblock" ("stage_id", "traverse", "first_seq", "count", '
    '"elapsed_min", "horizontal_mm", "vertical_mm", "force_reading") '
    "VALUES (%s, %s, %s, %s, %s, %s, %s, %s)"
)


def _insert_block(stage_id: int) -> ShearWriter:
    """One INSERT per block. On PostgreSQL through a server-side-binding cursor, so the packed
    columns travel as binary parameters (Django's client-side binding would spell each 400 kB
    column out as hex inside the SQL text, about 7 times slower)."""

    def values(columns: ShearColumns, start: int, stop: int) -> list[Any]:
        return [
            stage_id,
            int(columns.traverse[start]),
            int(columns.seq[start]),
            stop - start,
            *(encode_column(getattr(columns, n)[start:stop]) for n in ShearReadingBlock.COLUMNS),
        ]

    if connection.vendor == "postgresql":
        import psycopg

        def write_pg(columns: ShearColumns, start: int, stop: int) -> None:
            connection.ensure_connection()
            with connection.wrap_database_errors, psycopg.Cursor(connection.connection) as cursor:
                cursor.execute(INSERT_BLOCK_SQL, values(columns, start, stop))

        return write_pg

    def write(columns: ShearColumns, start: int, stop: int) -> None:
        with connection.cursor() as cursor:
            cursor.execute(INSERT_BLOCK_SQL, values(columns, start, stop))

    return write


def encode_column(values: np.ndarray) -> bytes:
    """Values as little-endian IEEE-754 doubles (the block column format); −0.0 kept as 0.0."""
    return (np.asarray(values, dtype=np.float64) + 0.0).astype("<f8").tobytes()
