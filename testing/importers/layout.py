"""Column layouts: which file column holds which quantity, in which unit.

The canonical CSV layout (documented default)::

    time_s,horizontal_displacement_mm,vertical_displacement_mm,shear_force_n[,phase]

- ``time_s``: seconds since the phase started (normal load applied / shearing started);
- displacements in mm from the gauge zero at the start of the phase; vertical **upward
  (dilation) positive**, so consolidation rows carry negative values (settlement = −vertical);
- ``shear_force_n``: force in N (a load-cell stage); a proving-ring stage uses a layout whose
  force column is in divisions (``div``);
- ``phase`` (optional): ``consolidation`` or ``shear``; without it every row is a shear reading.
  Consolidation rows may leave horizontal and force blank.

An optional ``traverse`` column (1, 2, …) numbers reversals; without it all rows are traverse 1.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from testing.importers.units import QUANTITY_UNITS

REQUIRED_QUANTITIES = ("time", "horizontal", "vertical", "force")
OPTIONAL_QUANTITIES = ("phase", "traverse")
PHASES = ("consolidation", "shear")


class LayoutError(ValueError):
    """A layout that cannot be used; the message says what to fix."""


@dataclass(frozen=True)
class ColumnMap:
    column: str
    unit: str = ""


@dataclass(frozen=True)
class Layout:
    """A column mapping and file options (see :class:`testing.models.ImportLayout`)."""

    name: str
    columns: Mapping[str, ColumnMap]
    delimiter: str = ","
    decimal_comma: bool = False
    header_row: int = 1
    sheet_name: str = ""
    phase_values: Mapping[str, str] = field(default_factory=dict)
    vertical_sign: int = 1
    rebase_each_phase: bool = False

    def __post_init__(self) -> None:
        for q in REQUIRED_QUANTITIES:
            if q not in self.columns:
                raise LayoutError(f"Layout {self.name!r} does not say which column holds {q}.")
            unit = self.columns[q].unit
            if unit not in QUANTITY_UNITS[q]:
                allowed = ", ".join(QUANTITY_UNITS[q])
                raise LayoutError(
                    f"Layout {self.name!r}: unit {unit!r} is not understood for {q} "
                    f"(use one of {allowed})."
                )
        unknown = set(self.columns) - set(REQUIRED_QUANTITIES) - set(OPTIONAL_QUANTITIES)
        if unknown:
            raise LayoutError(f"Layout {self.name!r}: unknown quantities {sorted(unknown)}.")
        names = [c.column for c in self.columns.values()]
        if len(set(names)) != len(names):
            raise LayoutError(f"Layout {self.name!r} maps one column to two quantities.")
        if self.vertical_sign not in (1, -1):
            raise LayoutError("The vertical sign must be +1 or −1.")
        if len(self.delimiter) != 1 or self.delimiter in '\r\n"':
            raise LayoutError("The delimiter must be one character (not a quote or line break).")
        if self.decimal_comma and self.delimiter == ",":
            raise LayoutError(
                "Numbers with a decimal comma need another field separator, e.g. ';'."
            )
        if self.header_row < 1:
            raise LayoutError("The header row is counted from 1.")
        for code, phase in self.phase_values.items():
            if phase not in PHASES:
                raise LayoutError(f"Phase code {code!r} must map to consolidation or shear.")

    @property
    def force_unit(self) -> str:
        return self.columns["force"].unit

    def phase_of(self, code: str) -> str | None:
        """The phase a cell of the phase column names, or None if it is not recognised."""
        text = code.strip()
        mapping = {k.strip().casefold(): v for k, v in self.phase_values.items()}
        mapping.setdefault("consolidation", "consolidation")
        mapping.setdefault("shear", "shear")
        return mapping.get(text.casefold())

    def snapshot(self) -> dict[str, Any]:
        """A JSON-ready copy, stored with each import so later layout edits do not rewrite history."""
        return {
            "name": self.name,
            "columns": {q: {"column": c.column, "unit": c.unit} for q, c in self.columns.items()},
            "delimiter": self.delimiter,
            "decimal_comma": self.decimal_comma,
            "header_row": self.header_row,
            "sheet_name": self.sheet_name,
            "phase_values": dict(self.phase_values),
            "vertical_sign": self.vertical_sign,
            "rebase_each_phase": self.rebase_each_phase,
        }

    @classmethod
    def from_mapping(cls, name: str, data: Mapping[str, Any]) -> Layout:
        """Build from stored JSON (model fields or a snapshot); raises :class:`LayoutError`."""
        try:
            columns = {
                str(q): ColumnMap(column=str(c["column"]), unit=str(c.get("unit", "")))
                for q, c in dict(data["columns"]).items()
            }
        except (KeyError, TypeError, ValueError) as exc:
            raise LayoutError(
                f"Layout {name!r}: columns must map each quantity to a column and unit."
            ) from exc
        return cls(
            name=name,
            columns=columns,
            delimiter=str(data.get("delimiter", ",")),
            decimal_comma=bool(data.get("decimal_comma", False)),
            header_row=int(data.get("header_row", 1)),
            sheet_name=str(data.get("sheet_name", "")),
            phase_values={str(k): str(v) for k, v in dict(data.get("phase_values") or {}).items()},
            vertical_sign=int(data.get("vertical_sign", 1)),
            rebase_each_phase=bool(data.get("rebase_each_phase", False)),
        )


CANONICAL_COLUMNS = (
    "time_s",
    "horizontal_displacement_mm",
    "vertical_displacement_mm",
    "shear_force_n",
)

CANONICAL_LAYOUT = Layout(
    name="Canonical CSV (time_s, displacements in mm, force in N)",
    columns={
        "time": ColumnMap("time_s", "s"),
        "horizontal": ColumnMap("horizontal_displacement_mm", "mm"),
        "vertical": ColumnMap("vertical_displacement_mm", "mm"),
        "force": ColumnMap("shear_force_n", "N"),
        "phase": ColumnMap("phase"),
        "traverse": ColumnMap("traverse"),
    },
)
