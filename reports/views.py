"""Staff pages for reports: list, create, view a revision, sign-off forms, amend, withdraw, audit.

Thin: each view parses the request, calls one service or selector, and renders.
"""

from __future__ import annotations

import csv
import json

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied
from django.http import FileResponse, Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.views.decorators.http import require_http_methods, require_POST

from reports import forms, selectors, services
from reports.models import ReportRevision, RevisionState, SignOffMeaning
from reports.rendering.charts import report_charts, to_plotly
from reports.rendering.html import render_report_html
from reports.verification import MAX_UPLOAD_BYTES, verify_number_and_hash, verify_pdf_bytes
from testing import access
from testing.exporters.tables import neutralise
from testing.services.errors import ServiceError
from testing.views.common import CAUTION


def _staff(request: HttpRequest) -> User:
    user = request.user
    if not access.is_lab_staff(user):
        raise Http404("No such page.")
    assert isinstance(user, User)
    return user


@login_required
def report_list(request: HttpRequest) -> HttpResponse:
    _staff(request)
    revisions = selectors.revisions_for_user(user=request.user)
    return render(request, "reports/list.html", {"revisions": revisions})


@login_required
@require_http_methods(["GET", "POST"])
def report_create(request: HttpRequest) -> HttpResponse:
    user = _staff(request)
    form = forms.ReportCreateForm(
        request.POST or None,
        initial={"project": request.GET.get("project"), "tests": request.GET.getlist("tests")},
    )
    if request.method == "POST" and form.is_valid():
        try:
            revision = services.report_create(
                user=user,
                project=form.cleaned_data["project"],
                tests=list(form.cleaned_data["tests"]),
                title=form.cleaned_data["title"],
                remarks=form.cleaned_data["remarks"],
                deviations=form.cleaned_data["deviations"],
            )
        except ServiceError as exc:
            form.add_error(None, str(exc))
        else:
            return redirect("reports:revision", pk=revision.pk)
    return render(request, "reports/create.html", {"form": form})


def _revision(request: HttpRequest, pk: int) -> ReportRevision:
    _staff(request)
    return selectors.revision_get_for_user(user=request.user, revision_id=pk)


@login_required
def revision_detail(request: HttpRequest, pk: int) -> HttpResponse:
    revision = _revision(request, pk)
    charts = {
        t["reference"]: {k: json.dumps(to_plotly(c)) for k, c in report_charts(t).items()}
        for t in revision.content.get("tests", [])
    }
    return render(
        request,
        "reports/revision.html",
        {
            "revision": revision,
            "signoffs": revision.signoffs.all(),
            "changes": revision.changes.all(),
            "replaced_by": selectors.replacement_of(revision),
            "sign_form": forms.SignForm(initial={"content_sha256": revision.content_sha256}),
            "reason_form": forms.ReasonForm(),
            "edit_form": forms.RevisionEditForm(
                initial={
                    "title": revision.title,
                    "remarks": revision.remarks,
                    "deviations": revision.deviations,
                }
            ),
            "charts_json": charts,
            "sign_refusal": _next_sign_refusal(request, revision),
            "caution": CAUTION,
        },
    )


_NEXT_SIGN_OFF = {
    RevisionState.DRAFT: SignOffMeaning.CHECKED,
    RevisionState.CHECKED: SignOffMeaning.APPROVED,
    RevisionState.APPROVED: SignOffMeaning.ISSUED,
}


def _next_sign_refusal(request: HttpRequest, revision: ReportRevision) -> str:
    """Why the signed-in person may not give the revision's next sign-off ("" if they may)."""
    meaning = _NEXT_SIGN_OFF.get(RevisionState(revision.state))
    if meaning is None:
        return ""
    return services.sign_refusal(_staff(request), revision, meaning)


@login_required
def revision_preview(request: HttpRequest, pk: int) -> HttpResponse:
    """The report as HTML, exactly as the PDF will show it (drafts marked DRAFT)."""
    return HttpResponse(render_report_html(_revision(request, pk)))


@login_required
def revision_pdf(request: HttpRequest, pk: int) -> FileResponse:
    revision = _revision(request, pk)
    if not revision.pdf:
        raise Http404("This revision has no PDF yet.")
    return FileResponse(
        revision.pdf.open("rb"),
        as_attachment=True,
        filename=f"{revision.report.number}-rev{revision.number}.pdf",
        content_type="application/pdf",
    )


@login_required
@require_POST
def revision_edit(request: HttpRequest, pk: int) -> HttpResponse:
    revision = _revision(request, pk)
    form = forms.RevisionEditForm(request.POST)
    if form.is_valid():
        try:
            services.revision_update(user=_staff(request), revision=revision, **form.cleaned_data)
            messages.success(request, "Saved.")
        except ServiceError as exc:
            messages.error(request, str(exc))
    else:
        messages.error(request, "Check the form: " + form.errors.as_text())
    return redirect("reports:revision", pk=pk)


_SIGN_ACTIONS = {
    "check": services.revision_check,
    "approve": services.revision_approve,
}


@login_required
@require_POST
def revision_sign(request: HttpRequest, pk: int, action: str) -> HttpResponse:
    revision = _revision(request, pk)
    user = _staff(request)
    form = forms.SignForm(request.POST)
    form.is_valid()
    password = form.cleaned_data.get("password") or None
    try:
        if action == "issue":
            services.revision_issue(user=user, revision=revision, password=password)
            messages.success(request, "Issued: the signed PDF is being prepared.")
        elif action in _SIGN_ACTIONS:
            _SIGN_ACTIONS[action](
                user=user,
                revision=revision,
                password=password,
                expected_content_sha256=form.cleaned_data.get("content_sha256") or None,
            )
            messages.success(
                request, f"Signed: {action}ed." if action != "approve" else "Signed: approved."
            )
        else:
            raise Http404("No such action.")
    except ServiceError as exc:
        messages.error(request, str(exc))
    return redirect("reports:revision", pk=pk)


@login_required
@require_POST
def revision_supersede(request: HttpRequest, pk: int) -> HttpResponse:
    revision = _revision(request, pk)
    form = forms.ReasonForm(request.POST)
    if not form.is_valid():
        messages.error(request, "Give the reason for the amendment.")
        return redirect("reports:revision", pk=pk)
    try:
        new = services.revision_supersede(
            user=_staff(request), revision=revision, reason=form.cleaned_data["reason"]
        )
    except ServiceError as exc:
        messages.error(request, str(exc))
        return redirect("reports:revision", pk=pk)
    return redirect("reports:revision", pk=new.pk)


@login_required
@require_POST
def revision_withdraw(request: HttpRequest, pk: int) -> HttpResponse:
    revision = _revision(request, pk)
    form = forms.ReasonForm(request.POST)
    if form.is_valid():
        try:
            services.revision_withdraw(
                user=_staff(request), revision=revision, reason=form.cleaned_data["reason"]
            )
        except ServiceError as exc:
            messages.error(request, str(exc))
    return redirect("reports:revision", pk=pk)


@login_required
def revision_audit(request: HttpRequest, pk: int) -> HttpResponse:
    revision = _revision(request, pk)
    events = selectors.audit_for_revision(user=request.user, revision=revision)
    if request.GET.get("format") == "csv":
        response = HttpResponse(content_type="text/csv; charset=utf-8")
        response["Content-Disposition"] = f'attachment; filename="audit-revision-{revision.pk}.csv"'
        writer = csv.writer(response)
        writer.writerow(
            ["at_utc", "actor", "action", "subject", "field", "old_value", "new_value", "reason"]
        )
        for e in events:
            row = [
                e.at.isoformat(),
                e.actor_name,
                e.action,
                e.subject,
                e.field,
                json.dumps(e.old_value, ensure_ascii=False),
                json.dumps(e.new_value, ensure_ascii=False),
                e.reason,
            ]
            # Spreadsheets evaluate cells starting with = + - @ (and tab/CR): neutralise them.
            writer.writerow([neutralise(c) for c in row])
        return response
    return render(request, "reports/audit.html", {"revision": revision, "events": events})


@require_http_methods(["GET", "POST"])
def verify(request: HttpRequest) -> HttpResponse:
    """Public: anyone may check a Tauline PDF (upload) or a report number with its sha256."""
    form = forms.VerifyForm(request.POST or None, request.FILES or None)
    result = None
    if request.method == "POST" and form.is_valid():
        upload = form.cleaned_data.get("file")
        if upload is not None:
            if upload.size > MAX_UPLOAD_BYTES:
                raise PermissionDenied("File too large.")
            result = verify_pdf_bytes(upload.read())
        else:
            result = verify_number_and_hash(
                number=form.cleaned_data["number"], sha256=form.cleaned_data["sha256"]
            )
    return render(request, "reports/verify.html", {"form": form, "result": result})
