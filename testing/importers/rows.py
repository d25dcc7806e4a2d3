"""The rules every reading row meets, whatever brought it: a logger file (CSV or XLSX), the entry
grid or rows sent to the API. Cells become numbers in the layout's units, rows are checked one by
one, and the result is either clean arrays in stored units (minutes, millimetres, newtons or raw
divisions) or every bad row with its row number, column, value and reason. No database here.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from testing.importers.layout import REQUIRED_QUANTITIES, Layout
from testing.importers.units import DIVISIONS, factor

MAX_ERRORS_LISTED = 1000
_NUMBER_WITH_UNIT = re.compile(
    r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([^\d\s].*?)\s*$"
)


@dataclass(frozen=True)
class RowError:
    """One problem in the file. ``row`` counts file rows from 1 (the header row included)."""

    row: int
    column: str
    value: str
    reason: str

    def as_dict(self) -> dict[str, Any]:
        return {"row": self.row, "column": self.column, "value": self.value, "reason": self.reason}


def _empty() -> NDArray[np.float64]:
    return np.empty(0, dtype=np.float64)


def _empty_int() -> NDArray[np.int64]:
    return np.empty(0, dtype=np.int64)


@dataclass
class ParsedReadings:
    """Readings in stored units, file order within each phase; or the errors that stop the import."""

    rows_read: int = 0
    errors: list[RowError] = field(default_factory=list)
    error_count: int = 0
    consolidation_elapsed_min: NDArray[np.float64] = field(default_factory=_empty)
    consolidation_settlement_mm: NDArray[np.float64] = field(default_factory=_empty)
    shear_traverse: NDArray[np.int64] = field(default_factory=_empty_int)
    shear_seq: NDArray[np.int64] = field(default_factory=_empty_int)
    shear_elapsed_min: NDArray[np.float64] = field(default_factory=_empty)
    shear_horizontal_mm: NDArray[np.float64] = field(default_factory=_empty)
    shear_vertical_mm: NDArray[np.float64] = field(default_factory=_empty)
    shear_force: NDArray[np.float64] = field(default_factory=_empty)
    fast_path: bool = False

    @property
    def ok(self) -> bool:
        return self.error_count == 0

    def add_error(self, error: RowError) -> None:
        self.error_count += 1
        if len(self.errors) < MAX_ERRORS_LISTED:
            self.errors.append(error)

    @property
    def error_summary(self) -> str:
        more = self.error_count - len(self.errors)
        tail = f" ({more} more not listed)" if more > 0 else ""
        return f"{self.error_count} bad row(s); nothing was saved{tail}."


def _show(value: object) -> str:
    text = "" if value is None else str(value)
    return text if len(text) <= 60 else text[:57] + "…"


def check_force_unit(layout: Layout, stage_force_unit: str, result: ParsedReadings) -> None:
    """A proving-ring stage stores divisions, a load-cell stage newtons: the file must match."""
    column = layout.columns["force"].column
    if stage_force_unit == DIVISIONS and layout.force_unit != DIVISIONS:
        result.add_error(
            RowError(
                layout.header_row,
                column,
                layout.force_unit,
                "this stage records proving-ring divisions; choose a layout whose force column "
                "is in divisions (the ring's calibration turns them into force)",
            )
        )
    elif stage_force_unit != DIVISIONS and layout.force_unit == DIVISIONS:
        result.add_error(
            RowError(
                layout.header_row,
                column,
                layout.force_unit,
                "this stage records force in N from a load cell; the layout gives divisions",
            )
        )


# --- one cell -----------------------------------------------------------------------------------


class _Bad(Exception):
    pass


def _number(value: object, unit: str, decimal_comma: bool) -> float:
    if isinstance(value, bool):
        raise _Bad("not a number")
    if isinstance(value, int | float):
        x = float(value)
    else:
        text = "" if value is None else str(value).strip()
        if not text:
            raise _Bad("empty cell where a number is needed")
        if decimal_comma:
            text = text.replace(",", ".")
        try:
            x = float(text)
        except ValueError:
            m = _NUMBER_WITH_UNIT.match(text)
            if m is None:
                raise _Bad("not a number") from None
            given = m.group(2)
            if given.casefold() != unit.casefold():
                raise _Bad(f"wrong unit {given!r}: this column is read in {unit}") from None
            x = float(m.group(1))
    if not math.isfinite(x):
        raise _Bad("not a finite number")
    return x


# --- row by row ---------------------------------------------------------------------------------


@dataclass
class _Phase:
    rows: list[int] = field(default_factory=list)
    traverse: list[int] = field(default_factory=list)
    t: list[float] = field(default_factory=list)
    h: list[float] = field(default_factory=list)
    v: list[float] = field(default_factory=list)
    f: list[float] = field(default_factory=list)


def validate_rows(
    rows: Iterable[tuple[int, Sequence[object]]],
    columns: dict[str, int],
    layout: Layout,
    header_width: int | None,
    result: ParsedReadings,
) -> None:
    names = {q: layout.columns[q].column for q in columns}
    units = {q: layout.columns[q].unit for q in columns}
    phases = {"consolidation": _Phase(), "shear": _Phase()}
    for row_number, cells in rows:
        if all(c is None or (isinstance(c, str) and not c.strip()) for c in cells):
            continue
        result.rows_read += 1
        if header_width is not None and len(cells) > header_width:
            result.add_error(
                RowError(
                    row_number,
                    "(row)",
                    _show(cells[header_width]),
                    f"row has {len(cells)} fields; the header has {header_width}",
                )
            )
            continue

        if header_width is not None and len(cells) < header_width:
            short = [q for q, i in columns.items() if i >= len(cells)]
            first = min(short, key=lambda q: columns[q]) if short else None
            if first is not None:
                result.add_error(
                    RowError(
                        row_number,
                        names[first],
                        "",
                        f"field missing: row has {len(cells)} fields; the header has {header_width}",
                    )
                )
                continue

        def cell(q: str, cells: Sequence[object] = cells) -> object:
            i = columns[q]
            return cells[i] if i < len(cells) else None

        phase = "shear"
        if "phase" in columns:
            code = cell("phase")
            named = layout.phase_of("" if code is None else str(code))
            if named is None:
                result.add_error(
                    RowError(
                        row_number,
                        names["phase"],
                        _show(code),
                        "phase must be consolidation or shear (or a code the layout maps)",
                    )
                )
                continue
            phase = named
        needed = ("time", "vertical") if phase == "consolidation" else REQUIRED_QUANTITIES
        values: dict[str, float] = {}
        bad = False
        for q in needed:
            raw = cell(q)
            try:
                values[q] = _number(raw, units[q], layout.decimal_comma)
            except _Bad as exc:
                result.add_error(RowError(row_number, names[q], _show(raw), str(exc)))
                bad = True
        traverse = 1
        if phase == "shear" and "traverse" in columns and not bad:
            raw = cell("traverse")
            try:
                x = _number(raw, "", False)
                if x != int(x) or x < 1:
                    raise _Bad("traverse must be a whole number from 1")
                traverse = int(x)
            except _Bad as exc:
                result.add_error(RowError(row_number, names["traverse"], _show(raw), str(exc)))
                bad = True
        if bad:
            continue
        p = phases[phase]
        p.rows.append(row_number)
        p.traverse.append(traverse)
        p.t.append(values["time"])
        p.v.append(values["vertical"])
        p.h.append(values.get("horizontal", 0.0))
        p.f.append(values.get("force", 0.0))

    cons, shear = phases["consolidation"], phases["shear"]
    ct, _, cv, _ = _scaled(layout, cons)
    st, sh, sv, sf = _scaled(layout, shear)
    _check_times(ct, np.zeros(len(ct), dtype=np.int64), cons.rows, names["time"], result)
    tr = np.asarray(shear.traverse, dtype=np.int64)
    _check_times(st, tr, shear.rows, names["time"], result)
    if result.error_count:
        return
    store_arrays(result, ct, cv, tr, st, sh, sv, sf)


def _scaled(
    layout: Layout, p: _Phase
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    return convert(
        layout,
        np.asarray(p.t, dtype=np.float64),
        np.asarray(p.h, dtype=np.float64),
        np.asarray(p.v, dtype=np.float64),
        np.asarray(p.f, dtype=np.float64),
    )


def convert(
    layout: Layout,
    t: NDArray[np.float64],
    h: NDArray[np.float64],
    v: NDArray[np.float64],
    f: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """File units → stored units; vertical made upward-positive; optionally zeroed at the first row."""
    cols = layout.columns
    t = t * factor("time", cols["time"].unit)
    h = h * factor("horizontal", cols["horizontal"].unit)
    v = v * (factor("vertical", cols["vertical"].unit) * layout.vertical_sign)
    f = f * factor("force", cols["force"].unit)
    if layout.rebase_each_phase and t.size:
        t, h, v = t - t[0], h - h[0], v - v[0]
    return t, h, v, f


def _check_times(
    t: NDArray[np.float64],
    traverse: NDArray[np.int64],
    rows: Sequence[int],
    column: str,
    result: ParsedReadings,
) -> None:
    """Times are zero or more and strictly increase within each traverse, in file order."""
    for k in (int(i) for i in np.flatnonzero(t < 0)):
        result.add_error(
            RowError(
                rows[k], column, _show(repr(float(t[k]))), "negative time: before the phase started"
            )
        )
    last: dict[int, tuple[float, int]] = {}
    seen: dict[tuple[int, float], int] = {}
    for k in range(t.size):
        tr, tk = int(traverse[k]), float(t[k])
        earlier = seen.get((tr, tk))
        if earlier is not None:
            result.add_error(
                RowError(
                    rows[k], column, _show(tk), f"duplicate reading: same time as row {earlier}"
                )
            )
            continue
        seen[(tr, tk)] = rows[k]
        prev = last.get(tr)
        if prev is not None and tk < prev[0] and tk >= 0:
            result.add_error(
                RowError(rows[k], column, _show(tk), f"time goes back: earlier than row {prev[1]}")
            )
            continue
        last[tr] = (tk, rows[k])


def _seq(traverse: NDArray[np.int64]) -> NDArray[np.int64]:
    """Reading number within each traverse, from 1, in file order."""
    seq = np.empty(traverse.size, dtype=np.int64)
    counts: dict[int, int] = {}
    for tr in np.unique(traverse):
        mask = traverse == tr
        seq[mask] = np.arange(1, int(mask.sum()) + 1)
        counts[int(tr)] = int(mask.sum())
    return seq


def store_arrays(
    result: ParsedReadings,
    ct: NDArray[np.float64],
    cv: NDArray[np.float64],
    tr: NDArray[np.int64],
    st: NDArray[np.float64],
    sh: NDArray[np.float64],
    sv: NDArray[np.float64],
    sf: NDArray[np.float64],
) -> None:
    result.consolidation_elapsed_min = ct
    result.consolidation_settlement_mm = -cv if cv.size else cv
    result.shear_traverse = tr
    result.shear_seq = _seq(tr)
    result.shear_elapsed_min = st
    result.shear_horizontal_mm = sh
    result.shear_vertical_mm = sv
    result.shear_force = sf


def increasing(t: NDArray[np.float64], traverse: NDArray[np.int64]) -> bool:
    if t.size == 0:
        return True
    if (t < 0).any():
        return False
    if (traverse == traverse[0]).all():
        return bool((np.diff(t) > 0).all())
    return all(bool((np.diff(t[traverse == tr]) > 0).all()) for tr in np.unique(traverse))
