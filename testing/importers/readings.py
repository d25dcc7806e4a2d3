"""Parse a logger file (CSV or XLSX) into reading arrays, or into the full list of bad rows.

Nothing here touches the database: the result is either clean arrays in stored units (minutes,
millimetres, newtons or raw divisions) or every bad row with its row number, column, value and
reason. A clean CSV takes a vectorised path (pandas' C parser); anything it cannot vouch for is
re-read row by row, which is the path that names each problem. Both paths apply the same rules.
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from testing.importers.layout import REQUIRED_QUANTITIES, Layout
from testing.importers.units import DIVISIONS, factor
from testing.importers.xlsx import is_xlsx, xlsx_rows

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


def decode_text(data: bytes) -> tuple[str, str]:
    """Text and encoding: UTF-8 (with or without a byte-order mark), else Windows-1252."""
    try:
        return data.decode("utf-8-sig"), "utf-8-sig"
    except UnicodeDecodeError:
        return data.decode("cp1252", errors="replace"), "cp1252"


def _show(value: object) -> str:
    text = "" if value is None else str(value)
    return text if len(text) <= 60 else text[:57] + "…"


# --- header -------------------------------------------------------------------------------------


def resolve_columns(
    header: Sequence[object], layout: Layout, header_row: int, result: ParsedReadings
) -> dict[str, int]:
    """Index of each mapped quantity in the header; missing required columns become errors."""
    cells = ["" if c is None else str(c).strip() for c in header]
    exact = {name: i for i, name in reversed(list(enumerate(cells)))}
    folded = {name.casefold(): i for i, name in reversed(list(enumerate(cells)))}
    found: dict[str, int] = {}
    for quantity, mapped in layout.columns.items():
        i = exact.get(mapped.column, folded.get(mapped.column.casefold()))
        if i is not None:
            found[quantity] = i
        elif quantity in REQUIRED_QUANTITIES:
            result.add_error(
                RowError(header_row, mapped.column, "", "column missing from the header row")
            )
    return found


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
                raise _Bad(
                    f"wrong unit {given!r}: the layout gives this column in {unit}"
                ) from None
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


def _validate_rows(
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
    _store(result, ct, cv, tr, st, sh, sv, sf)


def _scaled(
    layout: Layout, p: _Phase
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    return _convert(
        layout,
        np.asarray(p.t, dtype=np.float64),
        np.asarray(p.h, dtype=np.float64),
        np.asarray(p.v, dtype=np.float64),
        np.asarray(p.f, dtype=np.float64),
    )


def _convert(
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


def _store(
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


# --- CSV ----------------------------------------------------------------------------------------


def _csv_rows(text: str, layout: Layout) -> Iterator[tuple[int, list[str]]]:
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=layout.delimiter)
    for cells in reader:
        yield reader.line_num, cells


def _fast_csv(
    data: bytes, encoding: str, columns: dict[str, int], layout: Layout, result: ParsedReadings
) -> bool:
    """Vectorised read of a clean file. Returns False (changing nothing) at the first doubt."""
    import pandas as pd

    usecols = sorted(columns.values())
    numeric = {
        columns[q] for q in ("time", "horizontal", "vertical", "force", "traverse") if q in columns
    }
    try:
        df = pd.read_csv(
            io.BytesIO(data),
            encoding=encoding,
            sep=layout.delimiter,
            header=None,
            skiprows=layout.header_row,
            usecols=usecols,
            dtype={i: ("float64" if i in numeric else "category") for i in usecols},
            decimal="," if layout.decimal_comma else ".",
            engine="c",
            keep_default_na=False,
            na_values=[""],
            skip_blank_lines=True,
            on_bad_lines="error",
        )
    except (ValueError, pd.errors.ParserError):
        return False
    if len(df) == 0:
        return False
    # The C parser accepts some spellings ("inf", "1.5e", thousands) differently from float();
    # anything non-finite sends the file to the row-by-row path, which names it.
    t = df[columns["time"]].to_numpy(np.float64)
    v = df[columns["vertical"]].to_numpy(np.float64)
    h = df[columns["horizontal"]].to_numpy(np.float64)
    f = df[columns["force"]].to_numpy(np.float64)
    if "phase" in columns:
        cats = df[columns["phase"]]
        mapping = {c: layout.phase_of(str(c)) for c in cats.cat.categories}
        if any(m is None for m in mapping.values()) or cats.isna().any():
            return False
        is_shear = (cats.map({c: m == "shear" for c, m in mapping.items()})).to_numpy(bool)
    else:
        is_shear = np.ones(len(df), dtype=bool)
    if not (np.isfinite(t).all() and np.isfinite(v).all()):
        return False
    if not (np.isfinite(h[is_shear]).all() and np.isfinite(f[is_shear]).all()):
        return False
    if "traverse" in columns:
        tr_f = df[columns["traverse"]].to_numpy(np.float64)[is_shear]
        if not (np.isfinite(tr_f).all() and (tr_f >= 1).all() and (tr_f == np.round(tr_f)).all()):
            return False
        tr = tr_f.astype(np.int64)
    else:
        tr = np.ones(int(is_shear.sum()), dtype=np.int64)
    cons = ~is_shear
    ct, _, cv, _ = _convert(layout, t[cons], h[cons], v[cons], f[cons])
    st, sh, sv, sf = _convert(layout, t[is_shear], h[is_shear], v[is_shear], f[is_shear])
    if not (_increasing(ct, np.zeros(ct.size, dtype=np.int64)) and _increasing(st, tr)):
        return False
    result.rows_read = len(df)
    result.fast_path = True
    _store(result, ct, cv, tr, st, sh, sv, sf)
    return True


def _increasing(t: NDArray[np.float64], traverse: NDArray[np.int64]) -> bool:
    if t.size == 0:
        return True
    if (t < 0).any():
        return False
    if (traverse == traverse[0]).all():
        return bool((np.diff(t) > 0).all())
    return all(bool((np.diff(t[traverse == tr]) > 0).all()) for tr in np.unique(traverse))


def _header(
    rows: Iterator[tuple[int, Sequence[object]]], header_row: int
) -> Sequence[object] | None:
    for number, cells in rows:
        if number >= header_row:
            return cells
    return None


def parse_readings(
    data: bytes,
    *,
    filename: str,
    layout: Layout,
    stage_force_unit: str,
    max_uncompressed_bytes: int,
) -> ParsedReadings:
    """Parse and check every row of a CSV or XLSX logger file.

    ``stage_force_unit`` is the stage's ``force_unit`` (``"div"`` or ``"N"``). XLSX files are
    refused before loading if their unpacked size passes ``max_uncompressed_bytes`` or their
    compression ratio looks like a zip bomb (see :mod:`testing.importers.xlsx`).
    """
    result = ParsedReadings()
    check_force_unit(layout, stage_force_unit, result)
    if result.error_count:
        return result
    rows: Iterator[tuple[int, Sequence[object]]]
    encoding = ""
    if is_xlsx(data, filename):
        rows = xlsx_rows(
            data, sheet_name=layout.sheet_name, max_uncompressed_bytes=max_uncompressed_bytes
        )
    else:
        text, encoding = decode_text(data)
        rows = _csv_rows(text, layout)
    header = _header(rows, layout.header_row)
    if header is None:
        result.add_error(RowError(layout.header_row, "(header)", "", "the file has no header row"))
        return result
    columns = resolve_columns(header, layout, layout.header_row, result)
    if result.error_count:
        return result
    width: int | None = None
    if encoding:
        width = len(header)
        if _fast_csv(data, encoding, columns, layout, result):
            return result
    _validate_rows(rows, columns, layout, width, result)
    if result.ok and result.rows_read == 0:
        result.add_error(RowError(layout.header_row + 1, "(row)", "", "the file has no readings"))
    return result


@dataclass(frozen=True)
class Preview:
    """What a technician sees before importing: the header, the mapping and the first rows."""

    header: list[str]
    detected: dict[str, str]
    missing: list[str]
    rows: list[list[str]]


def preview_readings(
    data: bytes, *, filename: str, layout: Layout, n: int = 10, max_uncompressed_bytes: int
) -> Preview:
    """The header, which column each quantity was found in, and the first ``n`` rows as text."""
    rows: Iterator[tuple[int, Sequence[object]]]
    if is_xlsx(data, filename):
        rows = xlsx_rows(
            data, sheet_name=layout.sheet_name, max_uncompressed_bytes=max_uncompressed_bytes
        )
    else:
        rows = _csv_rows(decode_text(data)[0], layout)
    header = _header(rows, layout.header_row) or []
    scratch = ParsedReadings()
    columns = resolve_columns(header, layout, layout.header_row, scratch)
    first: list[list[str]] = []
    for _, cells in rows:
        if len(first) >= n:
            break
        first.append(["" if c is None else str(c) for c in cells])
    return Preview(
        header=["" if c is None else str(c) for c in header],
        detected={q: str(header[i]) for q, i in columns.items()},
        missing=[e.column for e in scratch.errors],
        rows=first,
    )
