"""The report's "Initial and final state" table prints the final state the stage results stored,
and content frozen before the final state was part of it still renders."""

from __future__ import annotations

import copy
import re
import subprocess
from html.parser import HTMLParser

import pytest
from django.template.defaultfilters import floatformat

from reports.models import ReportRevision
from reports.rendering.html import render_report_html

# Columns of a body row: stage, initial w ρ ρd e Sr, final w ρ ρd e Sr, ρs
FINAL_W, FINAL_RHO, FINAL_RHO_D, FINAL_E, FINAL_SR = 6, 7, 8, 9, 10
PRINTED = (("dry_density_mg_m3", FINAL_RHO_D, 3), ("void_ratio", FINAL_E, 3))
PRINTED += (("saturation_pct", FINAL_SR, 0),)


class _StateTable(HTMLParser):
    """The body rows (lists of cell texts) of every <table class="state">."""

    def __init__(self) -> None:
        super().__init__()
        self.rows: list[list[str]] = []
        self._in_table = False
        self._row: list[str] | None = None
        self._cell: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag == "table" and "state" in (dict(attrs).get("class") or "").split():
            self._in_table = True
        elif self._in_table and tag == "tr":
            self._row = []
        elif self._in_table and tag == "td" and self._row is not None:
            self._cell = []

    def handle_endtag(self, tag: str) -> None:
        if tag == "table":
            self._in_table = False
        elif tag == "td" and self._row is not None and self._cell is not None:
            self._row.append(" ".join("".join(self._cell).split()))
            self._cell = None
        elif tag == "tr" and self._row is not None:
            if self._row:
                self.rows.append(self._row)
            self._row = None

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell.append(data)


def _state_rows(html: str) -> list[list[str]]:
    parser = _StateTable()
    parser.feed(html)
    return parser.rows


def _stored_final(revision: ReportRevision) -> dict[int, dict[str, float]]:
    """Stage number -> StageResult.phase["final"] of the results the revision used."""
    out = {}
    for result in revision.stage_results.select_related("stage"):
        out[result.stage.stage_number] = result.phase["final"]
    return out


@pytest.mark.django_db
def test_pdf_prints_the_stored_final_state(issued: ReportRevision) -> None:
    stored = _stored_final(issued)
    assert len(stored) == 3
    with issued.pdf.open("rb") as fh:
        data = fh.read()
    text = subprocess.run(
        ["pdftotext", "-layout", "-", "-"], input=data, capture_output=True, check=True
    ).stdout.decode()
    start = text.index("Initial and final state")
    section = text[start : text.index("Results", start)]
    # -layout keeps each table row on one line: stage number, eleven values, ρs (measured/assumed)
    rows = {}
    for line in section.splitlines():
        tokens = line.split()
        if tokens and tokens[0].isdigit() and re.search(r"\((measured|assumed)\)", line):
            rows[int(tokens[0])] = tokens
    assert sorted(rows) == sorted(stored)
    for number, final in stored.items():
        for key, column, digits in PRINTED:
            assert final.get(key) is not None, (number, key)
            assert rows[number][column] == floatformat(final[key], digits), (number, key)


@pytest.mark.django_db
def test_html_state_table_matches_stored_final_state(issued: ReportRevision) -> None:
    stored = _stored_final(issued)
    rows = {int(r[0]): r for r in _state_rows(render_report_html(issued, charts=False))}
    assert sorted(rows) == sorted(stored)
    for number, final in stored.items():
        assert rows[number][FINAL_RHO] == floatformat(final["bulk_density_mg_m3"], 3)
        for key, column, digits in PRINTED:
            assert rows[number][column] == floatformat(final[key], digits), (number, key)


@pytest.mark.django_db
def test_content_frozen_without_the_final_state_still_renders(issued: ReportRevision) -> None:
    old = copy.deepcopy(issued.content)
    for test in old["tests"]:
        for stage in test["stages"]:
            assert "final" in stage["phase"]
            del stage["phase"]["final"]
    issued.content = old  # in memory only: the stored revision stays as issued
    rows = _state_rows(render_report_html(issued, charts=False))
    assert len(rows) == 3
    for row in rows:
        assert len(row) == 12, row
        assert row[FINAL_W] not in ("", "—")  # the final water content was always in the content
        for column in (FINAL_RHO, FINAL_RHO_D, FINAL_E, FINAL_SR):
            assert row[column] == "—", row
    issued.refresh_from_db()
    assert "final" in issued.content["tests"][0]["stages"][0]["phase"]
