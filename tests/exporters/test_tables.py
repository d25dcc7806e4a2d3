"""Spreadsheet exports: no cell a spreadsheet would evaluate, numbers stay numbers, units in headers.

What "evaluate" means follows OWASP's CSV-injection guidance (from memory of the OWASP page):
a cell whose text starts with =, +, -, @, tab or carriage return may be run as a formula.
"""

from __future__ import annotations

import csv
import io

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from openpyxl import load_workbook
from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE

from testing.exporters.tables import (
    DANGEROUS_FIRST,
    STAGE_COLUMNS,
    Column,
    Table,
    neutralise,
    write_csv,
    write_xlsx,
)

TEXT_COLUMNS = [i for i, c in enumerate(STAGE_COLUMNS) if not c.numeric]
NUMERIC_COLUMNS = [i for i, c in enumerate(STAGE_COLUMNS) if c.numeric]

hostile_text = st.one_of(
    st.text(max_size=30),
    st.builds(
        lambda p, s: p + s,
        st.sampled_from([*DANGEROUS_FIRST, "=cmd|'/c calc'!A1", "@SUM(1+1)"]),
        st.text(max_size=20),
    ),
)
numbers = st.one_of(
    st.integers(-(10**6), 10**6),
    st.floats(min_value=-1e12, max_value=1e12, allow_nan=False, width=64),
)


def _evaluable(text: str) -> bool:
    return text.startswith(DANGEROUS_FIRST)


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


@settings(max_examples=80, deadline=None)
@given(
    rows=st.lists(
        st.tuples(st.lists(hostile_text, min_size=len(TEXT_COLUMNS), max_size=len(TEXT_COLUMNS)),
                  st.lists(numbers, min_size=len(NUMERIC_COLUMNS), max_size=len(NUMERIC_COLUMNS))),
        min_size=1, max_size=5,
    )
)  # fmt: skip
def test_no_exported_cell_would_be_evaluated_and_numbers_stay_numeric(
    rows: list[tuple[list[str], list[float]]],
) -> None:
    table = Table("Stage results", STAGE_COLUMNS)
    for texts, nums in rows:
        row: list[object] = [None] * len(STAGE_COLUMNS)
        for i, t in zip(TEXT_COLUMNS, texts, strict=True):
            row[i] = t
        for i, x in zip(NUMERIC_COLUMNS, nums, strict=True):
            row[i] = x
        table.rows.append(row)  # type: ignore[arg-type]

    # CSV: read back with the csv module; a dangerous first character only on a true number
    # in a numeric column.
    parsed = list(csv.reader(io.StringIO(write_csv(table).decode("utf-8-sig"), newline="")))
    assert parsed[0] == [c.header for c in STAGE_COLUMNS]
    for (texts, nums), cells in zip(rows, parsed[1:], strict=True):
        for i, original in zip(TEXT_COLUMNS, texts, strict=True):
            assert not _evaluable(cells[i])
            assert cells[i] == original or cells[i] == "'" + original
        for i, x in zip(NUMERIC_COLUMNS, nums, strict=True):
            assert _is_number(cells[i]) and float(cells[i]) == x

    # XLSX: no formula cells; text cells hold text that is not evaluable; numbers are numbers.
    book = load_workbook(io.BytesIO(write_xlsx([table])))
    sheet = book.active
    assert sheet is not None
    for r, (texts, nums) in enumerate(rows, start=2):
        for i, original in zip(TEXT_COLUMNS, texts, strict=True):
            cell = sheet.cell(row=r, column=i + 1)
            assert cell.data_type != "f"
            value = "" if cell.value is None else str(cell.value)
            assert not _evaluable(value)
            printable = ILLEGAL_CHARACTERS_RE.sub("", original)
            if printable and "\r" not in printable:
                assert value in (printable, "'" + printable)
        for i, x in zip(NUMERIC_COLUMNS, nums, strict=True):
            cell = sheet.cell(row=r, column=i + 1)
            # Spreadsheets keep 15 significant digits (Excel's documented precision limit).
            assert cell.data_type == "n" and cell.value == pytest.approx(x, rel=1e-14, abs=1e-300)
    for row in sheet.iter_rows():
        for cell in row:
            assert cell.data_type != "f"


def test_units_are_in_the_headers_and_text_is_neutralised() -> None:
    assert Column("Peak shear stress", "kPa", numeric=True).header == "Peak shear stress [kPa]"
    assert neutralise("=1+1") == "'=1+1"
    assert neutralise("-2") == "'-2"
    assert neutralise("Dense SAND") == "Dense SAND"
    headers = [c.header for c in STAGE_COLUMNS]
    assert "Normal stress applied [kPa]" in headers and "Depth [m]" in headers
