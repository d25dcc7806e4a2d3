"""Results tables as CSV and XLSX that a spreadsheet cannot turn into formulas.

Text cells that begin with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return are prefixed
with an apostrophe (OWASP's advice for CSV injection), in both formats; numbers stay numbers
(numeric cells in XLSX, plain numerals in CSV); every header carries its unit.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

from testing import selectors
from testing.exporters.setup_values import applied_normal_stress_kpa, box_area_mm2
from testing.models import DirectShearTest

DANGEROUS_FIRST = ("=", "+", "-", "@", "\t", "\r")

Cell = str | float | int | None


def neutralise(text: str) -> str:
    """Text a spreadsheet will show as text, never evaluate."""
    return "'" + text if text.startswith(DANGEROUS_FIRST) else text


@dataclass(frozen=True)
class Column:
    name: str
    unit: str = ""
    numeric: bool = False

    @property
    def header(self) -> str:
        return f"{self.name} [{self.unit}]" if self.unit else self.name


@dataclass
class Table:
    title: str
    columns: Sequence[Column]
    rows: list[list[Cell]] = field(default_factory=list)


def _clean(value: Cell, column: Column) -> Cell:
    if value is None:
        return None
    if column.numeric:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise TypeError(f"{column.name}: numeric column got {value!r}")
        return value if math.isfinite(value) else None
    return neutralise(str(value))


def write_csv(table: Table) -> bytes:
    """UTF-8 with a byte-order mark (so spreadsheets pick the encoding), CR+LF rows."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow([neutralise(c.header) for c in table.columns])
    for row in table.rows:
        cells = [_clean(v, c) for v, c in zip(row, table.columns, strict=True)]
        writer.writerow(
            ["" if v is None else (repr(v) if isinstance(v, float) else v) for v in cells]
        )
    return ("\ufeff" + out.getvalue()).encode("utf-8")


def write_xlsx(tables: Iterable[Table]) -> bytes:
    """One sheet per table; text cells typed as strings, numbers as numbers, no formulas."""
    from openpyxl import Workbook
    from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE, TYPE_STRING

    book = Workbook(write_only=False)
    book.remove(book.worksheets[0])
    for table in tables:
        sheet = book.create_sheet(title=_sheet_title(table.title))
        for col, column in enumerate(table.columns, start=1):
            cell = sheet.cell(row=1, column=col)
            cell.value = neutralise(column.header)
            cell.data_type = TYPE_STRING
        for r, row in enumerate(table.rows, start=2):
            for col, (value, column) in enumerate(zip(row, table.columns, strict=True), start=1):
                clean = _clean(value, column)
                if clean is None:
                    continue
                cell = sheet.cell(row=r, column=col)
                if isinstance(clean, str):
                    # XML cannot hold most control characters; drop them (the CSV keeps them).
                    clean = neutralise(ILLEGAL_CHARACTERS_RE.sub("", clean))
                cell.value = clean
                if not column.numeric:
                    # openpyxl would otherwise store any text starting with "=" as a formula.
                    cell.data_type = TYPE_STRING
    out = io.BytesIO()
    book.save(out)
    return out.getvalue()


def _sheet_title(title: str) -> str:
    cleaned = "".join("_" if ch in "[]:*?/\\" else ch for ch in title).strip("'")
    return (cleaned or "Sheet")[:31]


STAGE_COLUMNS = (
    Column("Project"),
    Column("Test set"),
    Column("Borehole"),
    Column("Sample"),
    Column("Specimen"),
    Column("Depth", "m", numeric=True),
    Column("Stage", numeric=True),
    Column("Description"),
    Column("Normal stress applied", "kPa", numeric=True),
    Column("Peak shear stress", "kPa", numeric=True),
    Column("Normal stress at peak", "kPa", numeric=True),
    Column("Horizontal displacement at peak", "mm", numeric=True),
    Column("Vertical displacement at peak (up +)", "mm", numeric=True),
    Column("Residual shear stress", "kPa", numeric=True),
    Column("Rate measured", "mm/min", numeric=True),
    Column("Failure criterion"),
    Column("QA flags"),
    Column("Analysis version"),
)
ENVELOPE_COLUMNS = (
    Column("Project"),
    Column("Test set"),
    Column("Envelope"),
    Column("Stages used", numeric=True),
    Column("c'", "kPa", numeric=True),
    Column("phi'", "deg", numeric=True),
    Column("R squared", numeric=True),
    Column("Normal stress from", "kPa", numeric=True),
    Column("Normal stress to", "kPa", numeric=True),
    Column("Fit"),
    Column("Warnings"),
)
CAUTION = (
    "Results apply only to the specimens tested. Design parameters are for a qualified "
    "geotechnical engineer to select under local codes and licensed practice."
)


def results_tables(tests: Iterable[DirectShearTest]) -> tuple[Table, Table]:
    """Stage results and envelopes of the given test sets (latest rows; set-up data if none)."""
    stages = Table("Stage results", STAGE_COLUMNS)
    envelopes = Table("Envelopes", ENVELOPE_COLUMNS)
    for test in tests:
        results = selectors.latest_stage_results(test=test)
        area = box_area_mm2(test)
        for stage in test.stages.select_related("specimen__sample__borehole").order_by(
            "stage_number"
        ):
            sp = stage.specimen
            r = results.get(stage.pk)
            stages.rows.append(
                [
                    test.project.reference,
                    test.reference,
                    sp.sample.borehole.reference,
                    sp.sample.reference,
                    sp.reference,
                    float(sp.depth_top_m),
                    stage.stage_number,
                    sp.description or sp.sample.description,
                    applied_normal_stress_kpa(stage, area),
                    r.failure_shear_stress_kpa if r else None,
                    r.failure_normal_stress_kpa if r else None,
                    r.failure_horizontal_mm if r else None,
                    r.failure_vertical_mm if r else None,
                    r.residual_shear_stress_kpa if r else None,
                    r.measured_rate_mm_per_min if r else None,
                    r.failure_criterion if r else "not yet reduced",
                    "; ".join(f.get("message", "") for f in (r.flags if r else [])),
                    r.analysis_version if r else "",
                ]
            )
        for kind, e in sorted(selectors.latest_envelopes(test=test).items()):
            envelopes.rows.append(
                [
                    test.project.reference,
                    test.reference,
                    kind,
                    e.n,
                    e.cohesion_kpa,
                    e.friction_angle_deg,
                    e.r_squared,
                    e.normal_stress_min_kpa,
                    e.normal_stress_max_kpa,
                    e.fit_method,
                    "; ".join(str(w) for w in e.warnings),
                ]
            )
    for table in (stages, envelopes):
        table.rows.append([CAUTION] + [None] * (len(table.columns) - 1))
    return stages, envelopes


def results_export(
    *, user: object, tests: Iterable[DirectShearTest], file_format: str, name: str
) -> tuple[bytes, str, str]:
    """(content, content type, download file name) for the test sets the user may see.

    CSV holds the stage table; XLSX holds the stage and envelope sheets.
    """
    from django.contrib.auth.models import AnonymousUser, User

    from testing import access

    assert isinstance(user, User | AnonymousUser)
    visible = (
        DirectShearTest.objects.filter(pk__in=[t.pk for t in tests])
        .filter(access.test_filter(user))
        .select_related("project")
        .order_by("reference")
    )
    stages, envelopes = results_tables(visible)
    safe = "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)[:60] or "results"
    if file_format == "csv":
        return write_csv(stages), "text/csv; charset=utf-8", f"{safe}-results.csv"
    if file_format == "xlsx":
        return (
            write_xlsx([stages, envelopes]),
            "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
            f"{safe}-results.xlsx",
        )
    raise ValueError("file_format must be 'csv' or 'xlsx'")
