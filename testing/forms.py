"""Forms for the staff pages. They parse and validate input; services decide and write."""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Protocol

from django import forms

from testing.importers.readings import RowError
from testing.models import EnvelopeType, ForceUnit, ImportLayout, SampleStatus, ShearStage
from testing.models.samples import SAMPLE_TRANSITIONS, TRANSITIONS_NEEDING_NOTE


class SampleTransitionForm(forms.Form):
    """The next lifecycle move of one sample: only the moves allowed from its current state."""

    to_status = forms.ChoiceField(label="Move to")
    note = forms.CharField(
        label="Note",
        required=False,
        max_length=1000,
        widget=forms.Textarea(attrs={"rows": 2}),
        help_text="Required when putting a sample on hold or disposing of it.",
    )

    def __init__(self, *args: Any, current_status: str, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        allowed = SAMPLE_TRANSITIONS[SampleStatus(current_status)]
        field = self.fields["to_status"]
        assert isinstance(field, forms.ChoiceField)
        field.choices = [(s.value, s.label) for s in SampleStatus if s in allowed]

    @property
    def has_moves(self) -> bool:
        field = self.fields["to_status"]
        assert isinstance(field, forms.ChoiceField)
        return bool(field.choices)

    def clean(self) -> dict[str, Any]:
        data = super().clean() or {}
        target = data.get("to_status")
        if target in TRANSITIONS_NEEDING_NOTE and not (data.get("note") or "").strip():
            self.add_error("note", "Give a reason for this move.")
        return data


class StageExcludeForm(forms.Form):
    envelope_type = forms.ChoiceField(
        label="Envelope", choices=EnvelopeType.choices, initial=EnvelopeType.PEAK
    )
    reason = forms.CharField(
        label="Reason for leaving the stage out", max_length=500, strip=True, required=True
    )


class StageIncludeForm(forms.Form):
    envelope_type = forms.ChoiceField(label="Envelope", choices=EnvelopeType.choices)


class RecomputeForm(forms.Form):
    reason = forms.CharField(
        label="Reason",
        max_length=200,
        initial="Recompute requested from the test-set page",
        strip=True,
    )


class ReadingImportForm(forms.Form):
    """A logger file for one stage, with the saved column layout to read it by."""

    upload = forms.FileField(label="Logger file (CSV or XLSX)")
    layout: forms.ModelChoiceField[ImportLayout] = forms.ModelChoiceField(
        label="Column layout", queryset=ImportLayout.objects.none(), required=False
    )

    def __init__(self, *args: Any, layouts: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        field = self.fields["layout"]
        assert isinstance(field, forms.ModelChoiceField)
        field.queryset = layouts


# --- Manual entry grid ---------------------------------------------------------------------------

GRID_SHEAR_ROWS = 25
GRID_CONSOLIDATION_ROWS = 10
GRID_MORE_ROWS = 10
GRID_MAX_ROWS = 500
_CELL_NAME = re.compile(r"^(cons|shear)-(\d{1,6})-[a-z_]+$")
_NUMBER_IN_MM = re.compile(
    r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*mm\s*$", re.IGNORECASE
)
_ROW_MENTION = re.compile(r"\brow (\d+)\b")
PHASE_PREFIX = {"consolidation": "cons", "shear": "shear"}


@dataclass(frozen=True)
class GridColumn:
    """One typed column: its field suffix, its header (with unit) and how a screen reader names it."""

    key: str
    heading: str
    spoken: str
    help: str = ""


@dataclass(frozen=True)
class GridRow:
    """One grid row as the template draws it: its inputs, the problems found and reduced values."""

    phase: str
    number: int
    cells: list[forms.BoundField]
    problems: list[str]
    force_n: float | None = None
    shear_stress_kpa: float | None = None
    note: str = ""

    @property
    def problem_id(self) -> str:
        return f"{PHASE_PREFIX[self.phase]}-{self.number}-problem"


class _Reduced(Protocol):
    """What the grid needs of the readings service's reduced row."""

    @property
    def row(self) -> int: ...
    @property
    def force_n(self) -> float | None: ...
    @property
    def shear_stress_kpa(self) -> float | None: ...
    @property
    def note(self) -> str: ...


def _finite(value: float | None) -> float | None:
    return value if value is not None and math.isfinite(value) else None


def upward_from_settlement(typed: str) -> object:
    """A settlement dial reading (mm, compression +) as vertical movement, upward positive
    (vertical = −settlement). Text that is not a number goes on as typed for the checks to name."""
    try:
        return -float(typed)
    except ValueError:
        match = _NUMBER_IN_MM.match(typed)
        return -float(match.group(1)) if match else typed


class ManualReadingsForm(forms.Form):
    """The entry grid: consolidation rows (time, settlement dial) and shear rows (time, horizontal
    and vertical displacement, force reading), each cell a field named ``<cons|shear>-<row>-<key>``.

    The grid grows with the rows posted (an "add rows" request adds ten); empty rows are ignored.
    :meth:`rows` gives the service's row dicts; :meth:`mark_errors` maps the service's row numbers
    back to grid rows and cells.
    """

    def __init__(
        self,
        data: Any = None,
        *,
        stage: ShearStage,
        add_rows: str = "",
        require_rows: bool = True,
        **kwargs: Any,
    ) -> None:
        super().__init__(data, **kwargs)
        self.stage = stage
        self.require_rows = require_rows
        self.fields["traverse"] = forms.TypedChoiceField(
            label="Shear traverse",
            coerce=int,
            choices=[(n, str(n)) for n in range(1, stage.traverses + 1)],
            initial=1,
            required=False,
            empty_value=None,  # blank: traverse 1 (see traverse_number)
            help_text="Saving replaces this traverse's readings; the stage's other traverses stay.",
        )
        self.in_divisions = stage.force_unit == ForceUnit.DIVISIONS
        self.columns = {
            "consolidation": self._consolidation_columns(),
            "shear": self._shear_columns(),
        }
        posted = self._posted_rows(data)
        self.row_counts = {
            "consolidation": max(GRID_CONSOLIDATION_ROWS, posted["cons"]),
            "shear": max(GRID_SHEAR_ROWS, posted["shear"]),
        }
        self.too_many = any(n > GRID_MAX_ROWS for n in self.row_counts.values())
        for phase in self.row_counts:
            n = min(self.row_counts[phase], GRID_MAX_ROWS)
            if add_rows == PHASE_PREFIX[phase]:
                n = min(n + GRID_MORE_ROWS, GRID_MAX_ROWS)
            self.row_counts[phase] = n
        for phase, count in self.row_counts.items():
            for number in range(1, count + 1):
                for column in self.columns[phase]:
                    self.fields[self.cell_name(phase, number, column.key)] = forms.CharField(
                        required=False,
                        max_length=40,
                        widget=forms.TextInput(
                            attrs={
                                "aria-label": f"{phase.capitalize()} row {number}: {column.spoken}",
                                "autocomplete": "off",
                                "spellcheck": "false",
                                "size": 8,
                                "class": "cell",
                            }
                        ),
                    )
        self._problems: dict[tuple[str, int], list[str]] = {}
        self._reduced: dict[int, _Reduced] = {}
        self._origin: list[tuple[str, int]] = []
        self._reduce_origin: list[int] = []

    # --- layout ----------------------------------------------------------------------------

    @property
    def force_unit_label(self) -> str:
        return "divisions" if self.in_divisions else "N"

    def _consolidation_columns(self) -> list[GridColumn]:
        return [
            GridColumn("time_min", "Time (min)", "time since loading, min"),
            GridColumn(
                "settlement_mm",
                "Settlement dial (mm, compression +)",
                "settlement, mm, compression positive",
            ),
        ]

    def _shear_columns(self) -> list[GridColumn]:
        if self.in_divisions:
            if self.stage.force_calibration_id:
                how = "the linked calibration certificate turns divisions into force"
            else:
                how = (
                    f"the ring constant {self.stage.force_factor_n_per_unit:g} N per division "
                    f"(zero {self.stage.force_zero_reading:g} div) turns divisions into force"
                )
            force = GridColumn(
                "force",
                "Force reading (divisions)",
                "force reading, proving-ring divisions",
                f"Proving-ring dial in divisions; {how}.",
            )
        else:
            force = GridColumn(
                "force", "Force reading (N)", "force reading, N", "Load-cell reading in newtons."
            )
        return [
            GridColumn("time_min", "Time (min)", "time since shearing started, min"),
            GridColumn("horizontal_mm", "Horizontal displacement (mm)", "horizontal, mm"),
            GridColumn(
                "vertical_mm",
                "Vertical displacement (mm, dilation +)",
                "vertical, mm, dilation positive",
            ),
            force,
        ]

    @staticmethod
    def cell_name(phase: str, number: int, key: str) -> str:
        return f"{PHASE_PREFIX[phase]}-{number}-{key}"

    @staticmethod
    def _posted_rows(data: Any) -> dict[str, int]:
        highest = {"cons": 0, "shear": 0}
        for key in data or ():
            match = _CELL_NAME.match(str(key))
            if match:
                prefix, number = match.group(1), int(match.group(2))
                highest[prefix] = max(highest[prefix], number)
        return highest

    def grid(self, phase: str) -> list[GridRow]:
        out = []
        for number in range(1, self.row_counts[phase] + 1):
            cells = [self[self.cell_name(phase, number, c.key)] for c in self.columns[phase]]
            problems = list(self._problems.get((phase, number), []))
            for cell in cells:
                problems.extend(str(e) for e in cell.errors)
            reduced = self._reduced.get(number) if phase == "shear" else None
            out.append(
                GridRow(
                    phase,
                    number,
                    cells,
                    problems,
                    _finite(reduced.force_n) if reduced else None,
                    _finite(reduced.shear_stress_kpa) if reduced else None,
                    reduced.note if reduced else "",
                )
            )
        return out

    @property
    def consolidation_grid(self) -> list[GridRow]:
        return self.grid("consolidation")

    @property
    def shear_grid(self) -> list[GridRow]:
        return self.grid("shear")

    # --- parsing ---------------------------------------------------------------------------

    def clean(self) -> dict[str, Any]:
        data = super().clean() or {}
        if self.too_many:
            raise forms.ValidationError(f"At most {GRID_MAX_ROWS} rows per table.")
        if self.require_rows and not self.rows():
            raise forms.ValidationError("Type at least one reading before saving.")
        return data

    def _typed(self, phase: str, number: int) -> dict[str, str]:
        data = self.cleaned_data
        return {
            c.key: str(data.get(self.cell_name(phase, number, c.key)) or "").strip()
            for c in self.columns[phase]
        }

    @property
    def traverse_number(self) -> int:
        """The shear traverse being entered (1 until the form is cleaned)."""
        data = getattr(self, "cleaned_data", None) or {}
        return int(data.get("traverse") or 1)

    def rows(self) -> list[dict[str, object]]:
        """Non-empty grid rows as the service takes them: consolidation first, then shear (the
        chosen traverse); the settlement becomes upward-positive ``vertical_mm``."""
        rows: list[dict[str, object]] = []
        self._origin = []
        for number in range(1, self.row_counts["consolidation"] + 1):
            typed = self._typed("consolidation", number)
            if any(typed.values()):
                rows.append(
                    {
                        "phase": "consolidation",
                        "time_min": typed["time_min"],
                        "vertical_mm": upward_from_settlement(typed["settlement_mm"]),
                    }
                )
                self._origin.append(("consolidation", number))
        for number in range(1, self.row_counts["shear"] + 1):
            typed = self._typed("shear", number)
            if any(typed.values()):
                rows.append({"phase": "shear", "traverse": self.traverse_number, **typed})
                self._origin.append(("shear", number))
        return rows

    def reduce_rows(self) -> list[dict[str, object]]:
        """Shear rows with a force reading typed, for the reduced values beside them."""
        rows: list[dict[str, object]] = []
        self._reduce_origin = []
        for number in range(1, self.row_counts["shear"] + 1):
            typed = self._typed("shear", number)
            if typed["force"]:
                rows.append({"phase": "shear", "traverse": self.traverse_number, **typed})
                self._reduce_origin.append(number)
        return rows

    # --- results back onto the grid --------------------------------------------------------

    def attach_reduced(self, reduced: Sequence[_Reduced]) -> list[dict[str, object]]:
        """Reduced values for the rows of :meth:`reduce_rows`, keyed by shear grid row."""
        self._reduced = {}
        out: list[dict[str, object]] = []
        for item in reduced:
            number = self._reduce_origin[item.row - 1]
            self._reduced[number] = item
            force, stress = _finite(item.force_n), _finite(item.shear_stress_kpa)
            note = item.note or ("" if force is not None else "not a finite number")
            out.append({"row": number, "force_n": force, "shear_stress_kpa": stress, "note": note})
        return out

    def _where(self, service_row: int) -> tuple[str, int] | None:
        if 1 <= service_row <= len(self._origin):
            return self._origin[service_row - 1]
        return None

    def _say_row(self, service_row: int) -> str:
        where = self._where(service_row)
        return f"{where[0]} row {where[1]}" if where else f"row {service_row}"

    def mark_errors(self, errors: Sequence[RowError]) -> list[dict[str, str]]:
        """The service's bad rows in grid terms; marks each bad row and cell for the template."""
        self._problems = {}
        listed = []
        for error in errors:
            reason = _ROW_MENTION.sub(lambda m: self._say_row(int(m.group(1))), error.reason)
            where = self._where(error.row)
            column, value = error.column, error.value
            if where is not None:
                phase, number = where
                key = (
                    "settlement_mm"
                    if phase == "consolidation" and column == "vertical_mm"
                    else column
                )
                match = next((c for c in self.columns[phase] if c.key == key), None)
                if match is not None:
                    column = match.heading
                    value = self._typed(phase, number)[key]
                    widget = self.fields[self.cell_name(phase, number, key)].widget
                    widget.attrs["aria-invalid"] = "true"
                    widget.attrs["aria-describedby"] = f"{PHASE_PREFIX[phase]}-{number}-problem"
                self._problems.setdefault(where, []).append(f"{column}: {reason}")
            listed.append(
                {
                    "row": self._say_row(error.row).capitalize(),
                    "column": column,
                    "value": value,
                    "reason": reason,
                }
            )
        return listed
