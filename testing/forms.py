"""Forms for the staff pages. They parse and validate input; services decide and write."""

from __future__ import annotations

from typing import Any

from django import forms

from testing.models import EnvelopeType, ImportLayout, SampleStatus
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


class ManualReadingsForm(forms.Form):
    """Shear readings typed or pasted, one per line: ``time_min, horizontal_mm, vertical_mm, force``."""

    shear_rows = forms.CharField(
        label="Shear readings",
        widget=forms.Textarea(attrs={"rows": 10, "spellcheck": "false"}),
        help_text="One reading per line: elapsed time (min), horizontal displacement (mm), "
        "vertical displacement (mm, dilation +), force reading (divisions or N). "
        "Commas, tabs or spaces between values.",
    )

    def rows(self) -> list[dict[str, str]]:
        """Lines split into named fields; the service checks the numbers and lists bad rows."""
        text: str = self.cleaned_data["shear_rows"]
        parsed = []
        for line in text.splitlines():
            if not line.strip():
                continue
            parts = line.replace("\t", ",").replace(";", ",").split(",")
            if len(parts) == 1:
                parts = line.split()
            values = [p.strip() for p in parts]
            keys = ("time_min", "horizontal_mm", "vertical_mm", "force")
            row = dict(zip(keys, values + [""] * (len(keys) - len(values)), strict=False))
            parsed.append({"phase": "shear", "traverse": "1", **row})
        return parsed
