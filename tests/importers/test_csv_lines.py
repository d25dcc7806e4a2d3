"""The importer hands the csv module one line at a time (so reading the header of a large file
copies nothing else). What it reads must be exactly what the standard library reads from the whole
text opened with ``newline=""`` (Python's csv documentation), whatever the line endings."""

from __future__ import annotations

import csv
import io

from hypothesis import given, settings
from hypothesis import strategies as st

from testing.importers.layout import CANONICAL_LAYOUT
from testing.importers.readings import _csv_rows


def _reference(text: str) -> list[tuple[int, list[str]]]:
    reader = csv.reader(io.StringIO(text, newline=""))
    return [(reader.line_num, cells) for cells in reader]


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet='ab1.,"\r\n ', max_size=60))
def test_rows_and_row_numbers_match_the_standard_reader(text: str) -> None:
    try:
        expected = _reference(text)
    except csv.Error:  # e.g. a NUL or an unterminated quote the reference refuses too
        return
    assert list(_csv_rows(text, CANONICAL_LAYOUT)) == expected


def test_endings_of_every_kind() -> None:
    for text in ("a,b\r\n1,2\r\n", "a,b\n1,2", "a,b\r1,2\r", '"x\ny",2\n3,4\n', "a\n\n\nb\n"):
        assert list(_csv_rows(text, CANONICAL_LAYOUT)) == _reference(text), repr(text)
