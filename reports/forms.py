"""Forms for the staff report pages and the verification page."""

from __future__ import annotations

from typing import Any

from django import forms

from testing.models import DirectShearTest, Project


class ReportCreateForm(forms.Form):
    project = forms.ModelChoiceField(queryset=Project.objects.order_by("reference"))
    tests = forms.ModelMultipleChoiceField(
        queryset=DirectShearTest.objects.select_related("project").order_by("project", "reference"),
        widget=forms.CheckboxSelectMultiple,
        label="Test sets",
    )
    title = forms.CharField(max_length=200, initial="Direct shear test report")
    remarks = forms.CharField(widget=forms.Textarea(attrs={"rows": 3}), required=False)
    deviations = forms.CharField(
        widget=forms.Textarea(attrs={"rows": 3}),
        required=False,
        help_text="Additions to, deviations from or exclusions from the method.",
    )

    def clean(self) -> dict[str, Any]:
        data = super().clean() or {}
        project, tests = data.get("project"), data.get("tests")
        if project and tests and any(t.project_id != project.pk for t in tests):
            raise forms.ValidationError("Choose test sets of the selected project only.")
        return data


class RevisionEditForm(forms.Form):
    title = forms.CharField(max_length=200)
    remarks = forms.CharField(widget=forms.Textarea(attrs={"rows": 3}), required=False)
    deviations = forms.CharField(widget=forms.Textarea(attrs={"rows": 3}), required=False)
    refresh_results = forms.BooleanField(
        required=False, label="Freeze the latest computed results again"
    )
    reason = forms.CharField(max_length=500, required=False)


class SignForm(forms.Form):
    password = forms.CharField(
        widget=forms.PasswordInput(attrs={"autocomplete": "current-password"}),
        required=False,
        help_text="Your password, again: signing needs it every time.",
    )
    content_sha256 = forms.CharField(widget=forms.HiddenInput, required=False)


class ReasonForm(forms.Form):
    reason = forms.CharField(widget=forms.Textarea(attrs={"rows": 3}), max_length=2000)


class VerifyForm(forms.Form):
    file = forms.FileField(required=False, label="Report PDF")
    number = forms.CharField(max_length=60, required=False, label="Report number")
    sha256 = forms.CharField(max_length=80, required=False, label="sha256 of the PDF")

    def clean(self) -> dict[str, Any]:
        data = super().clean() or {}
        if not data.get("file") and not (data.get("number") and data.get("sha256")):
            raise forms.ValidationError("Upload a PDF, or enter the report number and its sha256.")
        return data
