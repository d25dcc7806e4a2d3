"""Reading a stage's shear readings out of their column blocks (:class:`ShearReadingBlock`).

Every reader goes through here: the reduction's inputs, the audit digest, the calibration range
check, the API's pages of readings, the stage pages. A stage's readings come back in one query, as
numpy columns in (traverse, reading number) order.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any, overload

import numpy as np
from numpy.typing import NDArray

from testing.models import ShearReadingBlock

_LE_DOUBLE = np.dtype("<f8")


def decode_column(raw: Any) -> NDArray[np.float64]:
    """A block column (bytes or memoryview of little-endian doubles) as a float64 array."""
    return np.frombuffer(raw, dtype=_LE_DOUBLE).astype(np.float64)


@dataclass(frozen=True)
class ShearReadingRow:
    """One shear reading, as the API shows it."""

    traverse: int
    seq: int
    elapsed_min: float
    horizontal_mm: float
    vertical_mm: float
    force_reading: float


@dataclass(frozen=True)
class ShearColumns:
    """A stage's shear readings as columns, in (traverse, reading number) order."""

    traverse: NDArray[np.int64]
    seq: NDArray[np.int64]
    elapsed_min: NDArray[np.float64]
    horizontal_mm: NDArray[np.float64]
    vertical_mm: NDArray[np.float64]
    force_reading: NDArray[np.float64]

    def __len__(self) -> int:
        return int(self.seq.size)

    def arrays(self) -> tuple[NDArray[Any], ...]:
        """(traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading)."""
        return (
            self.traverse, self.seq, self.elapsed_min, self.horizontal_mm, self.vertical_mm,
            self.force_reading,
        )  # fmt: skip

    def take(self, order: NDArray[np.intp]) -> ShearColumns:
        """The readings in ``order`` (indices into these columns)."""
        return ShearColumns(*(np.asarray(a)[order] for a in self.arrays()))

    def row(self, k: int) -> ShearReadingRow:
        return ShearReadingRow(
            traverse=int(self.traverse[k]),
            seq=int(self.seq[k]),
            elapsed_min=float(self.elapsed_min[k]),
            horizontal_mm=float(self.horizontal_mm[k]),
            vertical_mm=float(self.vertical_mm[k]),
            force_reading=float(self.force_reading[k]),
        )

    def rows(self) -> Iterator[ShearReadingRow]:
        return (self.row(k) for k in range(len(self)))


def _empty_columns() -> ShearColumns:
    f, i = np.empty(0, dtype=np.float64), np.empty(0, dtype=np.int64)
    return ShearColumns(i, i.copy(), f, f.copy(), f.copy(), f.copy())


def columns_from_blocks(blocks: Iterable[Any]) -> ShearColumns:
    """Join blocks (model instances or rows with the same attributes), in the order given."""
    parts: list[tuple[Any, ...]] = []
    for b in blocks:
        n = int(b.count)
        parts.append(
            (
                np.full(n, int(b.traverse), dtype=np.int64),
                np.arange(int(b.first_seq), int(b.first_seq) + n, dtype=np.int64),
                *(decode_column(getattr(b, c)) for c in ShearReadingBlock.COLUMNS),
            )
        )
    if not parts:
        return _empty_columns()
    joined = [np.concatenate([p[k] for p in parts]) for k in range(6)]
    return ShearColumns(*joined)


def shear_columns(stage_id: int, *, traverses: Sequence[int] | None = None) -> ShearColumns:
    """The stage's shear readings (or only those of ``traverses``), one query."""
    blocks = ShearReadingBlock.objects.filter(stage_id=stage_id)
    if traverses is not None:
        blocks = blocks.filter(traverse__in=list(traverses))
    return columns_from_blocks(blocks.order_by("traverse", "first_seq"))


def shear_reading_count(stage_id: int) -> int:
    """How many shear readings the stage has (no reading values are fetched)."""
    counts = ShearReadingBlock.objects.filter(stage_id=stage_id).values_list("count", flat=True)
    return int(sum(counts))


def has_shear_readings(stage_id: int) -> bool:
    return ShearReadingBlock.objects.filter(stage_id=stage_id).exists()


def shear_force_span(stage_id: int) -> tuple[float, float] | None:
    """Lowest and highest force reading of the stage [div or N], or None without readings."""
    forces = [
        decode_column(raw)
        for raw in ShearReadingBlock.objects.filter(stage_id=stage_id).values_list(
            "force_reading", flat=True
        )
    ]
    if not forces:
        return None
    joined = np.concatenate(forces)
    return float(joined.min()), float(joined.max())


class ShearReadingPages(Sequence[ShearReadingRow]):
    """The stage's readings as a lazily read sequence for a paginator: its length costs one small
    query, and a slice fetches only the blocks that hold it."""

    def __init__(self, stage_id: int) -> None:
        self._stage_id = stage_id
        self._spans: list[tuple[int, int, int]] | None = None  # (start, count, block id)

    def _index(self) -> list[tuple[int, int, int]]:
        if self._spans is None:
            spans, start = [], 0
            for pk, count in (
                ShearReadingBlock.objects.filter(stage_id=self._stage_id)
                .order_by("traverse", "first_seq")
                .values_list("pk", "count")
            ):
                spans.append((start, int(count), int(pk)))
                start += int(count)
            self._spans = spans
        return self._spans

    def __len__(self) -> int:
        spans = self._index()
        return spans[-1][0] + spans[-1][1] if spans else 0

    @overload
    def __getitem__(self, index: int) -> ShearReadingRow: ...

    @overload
    def __getitem__(self, index: slice) -> list[ShearReadingRow]: ...

    def __getitem__(self, index: int | slice) -> ShearReadingRow | list[ShearReadingRow]:
        if isinstance(index, int):
            n = len(self)
            k = index + n if index < 0 else index
            if not 0 <= k < n:
                raise IndexError(index)
            return self[k : k + 1][0]
        start, stop, step = index.indices(len(self))
        if step != 1:
            raise ValueError("readings are paged in steps of 1")
        if stop <= start:
            return []
        wanted = [(s, c, pk) for s, c, pk in self._index() if s < stop and s + c > start]
        blocks = ShearReadingBlock.objects.in_bulk([pk for _, _, pk in wanted])
        columns = columns_from_blocks(blocks[pk] for _, _, pk in wanted)
        offset = wanted[0][0]
        return [columns.row(k) for k in range(start - offset, stop - offset)]
