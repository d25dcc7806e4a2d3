"""Parse a logger file (CSV or XLSX) into reading arrays, or into the full list of bad rows.

Nothing here touches the database: the result is either clean arrays in stored units (minutes,
millimetres, newtons or raw divisions) or every bad row with its row number, column, value and
reason. A clean CSV takes a vectorised path (pandas' C parser); anything it cannot vouch for is
re-read row by row, which is the path that names each problem. Both paths apply the same rules
(:mod:`testing.importers.rows`).
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np

from testing.importers.layout import REQUIRED_QUANTITIES, Layout
from testing.importers.rows import (
    ParsedReadings,
    RowError,
    check_force_unit,
    convert,
    increasing,
    store_arrays,
    validate_rows,
)
from testing.importers.xlsx import is_xlsx, xlsx_rows

__all__ = [
    "ParsedReadings",
    "Preview",
    "RowError",
    "check_force_unit",
    "decode_text",
    "parse_readings",
    "preview_readings",
    "resolve_columns",
]


def decode_text(data: bytes) -> tuple[str, str]:
    """Text and encoding: UTF-8 (with or without a byte-order mark), else Windows-1252."""
    try:
        return data.decode("utf-8-sig"), "utf-8-sig"
    except UnicodeDecodeError:
        return data.decode("cp1252", errors="replace"), "cp1252"


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


# --- CSV ----------------------------------------------------------------------------------------


# A line with its ending (\r\n, \r or \n, as ``newline=""`` reads them), or the last line without one.
_LINE = re.compile(r"[^\r\n]*(?:\r\n?|\n)|[^\r\n]+\Z")


def _lines(text: str) -> Iterator[str]:
    """The text's lines, one at a time: reading the header of a large file copies nothing else."""
    return (m.group() for m in _LINE.finditer(text))


def _csv_rows(text: str, layout: Layout) -> Iterator[tuple[int, list[str]]]:
    reader = csv.reader(_lines(text), delimiter=layout.delimiter)
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
    ct, _, cv, _ = convert(layout, t[cons], h[cons], v[cons], f[cons])
    st, sh, sv, sf = convert(layout, t[is_shear], h[is_shear], v[is_shear], f[is_shear])
    if not (increasing(ct, np.zeros(ct.size, dtype=np.int64)) and increasing(st, tr)):
        return False
    result.rows_read = len(df)
    result.fast_path = True
    store_arrays(result, ct, cv, tr, st, sh, sv, sf)
    return True


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
    validate_rows(rows, columns, layout, width, result)
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
