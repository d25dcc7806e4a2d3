"""The audit row for a bulk change of a stage's readings: counts and digests before and after.

Digest of a stage's readings (so anyone can recompute it from the tables; shear readings are
stored in column blocks, reading ``first_seq + i`` of a block being its columns' ``i``-th values):

- consolidation: the rows ordered by ``elapsed_min``, each as (elapsed_min, settlement_mm);
- shear: the rows ordered by (traverse, seq), each as (traverse, seq, elapsed_min,
  horizontal_mm, vertical_mm, force_reading);
- each phase's values as little-endian IEEE-754 doubles, row after row (−0.0 written as 0.0),
  hashed with sha256;
- the stage's digest is sha256 of the text ``"consolidation <n> <hex>\\nshear <n> <hex>\\n"``.

The digest after a write is computed from the values written (the phases not written keep their
earlier digest), so recording costs one read of the readings that were there before.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from django.contrib.auth.models import User

from testing.importers.readings import ParsedReadings
from testing.models import (
    ConsolidationReading,
    ReadingImport,
    ReadingsChange,
    ReadingsSource,
    ShearStage,
)
from testing.selectors_readings import shear_columns


@dataclass(frozen=True)
class PhaseDigest:
    rows: int
    sha256: str


@dataclass(frozen=True)
class ReadingsState:
    consolidation: PhaseDigest
    shear: PhaseDigest

    @property
    def sha256(self) -> str:
        text = (
            f"consolidation {self.consolidation.rows} {self.consolidation.sha256}\n"
            f"shear {self.shear.rows} {self.shear.sha256}\n"
        )
        return hashlib.sha256(text.encode("ascii")).hexdigest()


def _digest(columns: Sequence[np.ndarray], order: np.ndarray | None) -> PhaseDigest:
    """sha256 of the rows (in ``order``; None = as given) as little-endian doubles, row-major."""
    n = int(np.asarray(columns[0]).size)
    rows = np.empty(n, dtype=[(f"c{k}", "<f8") for k in range(len(columns))])
    for k, column in enumerate(columns):
        values = np.asarray(column, dtype=np.float64) + 0.0  # −0.0 → 0.0, as a database may
        rows[f"c{k}"] = values if order is None else values[order]
    return PhaseDigest(rows=n, sha256=hashlib.sha256(rows.data.cast("B")).hexdigest())


def consolidation_digest(elapsed_min: np.ndarray, settlement_mm: np.ndarray) -> PhaseDigest:
    elapsed = np.asarray(elapsed_min, dtype=np.float64)
    in_order = bool(np.all(elapsed[1:] > elapsed[:-1]))
    return _digest(
        (elapsed, settlement_mm), None if in_order else np.argsort(elapsed, kind="stable")
    )


def shear_digest(
    traverse: np.ndarray,
    seq: np.ndarray,
    elapsed_min: np.ndarray,
    horizontal_mm: np.ndarray,
    vertical_mm: np.ndarray,
    force_reading: np.ndarray,
) -> PhaseDigest:
    tr, sq = np.asarray(traverse), np.asarray(seq)
    d_tr, d_sq = tr[1:] - tr[:-1], sq[1:] - sq[:-1]
    in_order = bool(np.all((d_tr > 0) | ((d_tr == 0) & (d_sq > 0))))
    order = None if in_order else np.lexsort((sq, tr))
    return _digest((traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading), order)


def _columns(rows: Sequence[Sequence[float]], width: int) -> list[np.ndarray]:
    table = np.asarray(rows, dtype=np.float64).reshape(len(rows), width)
    return [table[:, k] for k in range(width)]


def readings_state(stage_id: int) -> ReadingsState:
    """The stage's readings as stored now (read inside the caller's transaction)."""
    consolidation = list(
        ConsolidationReading.objects.filter(stage_id=stage_id)
        .order_by("elapsed_min")
        .values_list("elapsed_min", "settlement_mm")
    )
    c = _columns(consolidation, 2)
    s = shear_columns(stage_id)
    return ReadingsState(
        consolidation=consolidation_digest(c[0], c[1]),
        shear=shear_digest(
            s.traverse, s.seq, s.elapsed_min, s.horizontal_mm, s.vertical_mm, s.force_reading
        ),
    )


def rows_state(
    consolidation: Sequence[Sequence[float]], shear: Sequence[Sequence[float]]
) -> ReadingsState:
    """The state made of these rows: (elapsed_min, settlement_mm) and
    (traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading)."""
    c = _columns(consolidation, 2)
    s = _columns(shear, 6)
    return ReadingsState(
        consolidation=consolidation_digest(c[0], c[1]),
        shear=shear_digest(s[0], s[1], s[2], s[3], s[4], s[5]),
    )


def parsed_state(before: ReadingsState, parsed: ParsedReadings) -> ReadingsState:
    """The state after the phases present in ``parsed`` replaced those of ``before``."""
    consolidation = before.consolidation
    if parsed.consolidation_elapsed_min.size:
        consolidation = consolidation_digest(
            parsed.consolidation_elapsed_min, parsed.consolidation_settlement_mm
        )
    shear = before.shear
    if parsed.shear_elapsed_min.size:
        shear = shear_digest(
            parsed.shear_traverse,
            parsed.shear_seq,
            parsed.shear_elapsed_min,
            parsed.shear_horizontal_mm,
            parsed.shear_vertical_mm,
            parsed.shear_force,
        )
    return ReadingsState(consolidation=consolidation, shear=shear)


def readings_change_record(
    *,
    stage: ShearStage,
    user: User | None,
    source: ReadingsSource | str,
    before: ReadingsState,
    after: ReadingsState,
    reason: str = "",
    reading_import: ReadingImport | None = None,
) -> ReadingsChange:
    """Append the audit row; call inside the transaction that wrote the readings."""
    return ReadingsChange.objects.create(
        stage=stage,
        by=user,
        source=ReadingsSource(source),
        reading_import=reading_import,
        consolidation_rows_before=before.consolidation.rows,
        shear_rows_before=before.shear.rows,
        consolidation_rows_after=after.consolidation.rows,
        shear_rows_after=after.shear.rows,
        sha256_before=before.sha256,
        sha256_after=after.sha256,
        reason=reason.strip(),
    )


def readings_trail_problems(stage_id: int) -> list[str]:
    """Check one stage's readings against its audit rows: every change starts from the digest the
    previous one left (the first from no readings at all), and the readings stored now are exactly
    what the last change left. Empty when the trail is whole."""
    problems: list[str] = []
    expected = rows_state([], []).sha256
    changes = ReadingsChange.objects.filter(stage_id=stage_id).order_by("at", "id")
    for change_id, before, after in changes.values_list("id", "sha256_before", "sha256_after"):
        if before != expected:
            problems.append(
                f"readings change {change_id} starts from readings sha256 {before[:12]}…, but the "
                f"trail had reached {expected[:12]}…"
            )
        expected = after
    current = readings_state(stage_id).sha256
    if current != expected:
        problems.append(
            f"the stored readings (sha256 {current[:12]}…) are not what the last recorded change "
            f"left ({expected[:12]}…): they were changed outside Tauline"
        )
    return problems
