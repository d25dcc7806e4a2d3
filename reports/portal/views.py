"""Client-facing, read-only pages scoped by organisation.

A client sees their own organisation's projects, boreholes and samples with their progress, the
issued revisions (current, superseded — with a link to the current one — or withdrawn) and the
strength results of released test sets as the issued report froze them; nothing else. Anything
else answers the same 404 as a random id. Lab staff may open the same pages (they see every
organisation), to see what a client sees.
"""

from __future__ import annotations

import uuid
from typing import Any

from django.contrib.auth.decorators import login_required
from django.core.exceptions import PermissionDenied
from django.http import FileResponse, Http404, HttpRequest, HttpResponse
from django.shortcuts import render
from django.views.decorators.http import require_http_methods

from reports import forms, selectors
from reports.portal import selectors as portal_selectors
from reports.rendering.charts import Chart, envelope_chart, shear_curves_chart, to_plotly
from reports.verification import MAX_UPLOAD_BYTES, Verification, verify_pdf_bytes
from testing import access
from testing.views.common import CAUTION

# Plotly layout for the portal's figures: the chart's own title is the figure caption instead,
# and the legend sits under the plot so the plot keeps its width on a tablet.
_LAYOUT = {
    "title": None,
    "font": {"family": "system-ui, 'DejaVu Sans', sans-serif", "size": 13, "color": "#1c2733"},
    "margin": {"l": 64, "r": 16, "t": 16, "b": 72},
    "paper_bgcolor": "#ffffff",
    "plot_bgcolor": "#fbfcfd",
    "legend": {"orientation": "h", "x": 0, "y": -0.32, "yanchor": "top"},
    "hovermode": "closest",
    "height": 480,
}


def _figure(chart: Chart) -> dict[str, Any]:
    figure = to_plotly(chart)
    figure["layout"].update(_LAYOUT)
    for axis in ("xaxis", "yaxis"):
        figure["layout"][axis].update({"gridcolor": "#e3e8ee", "zeroline": False})
    return figure


@login_required
def portal_home(request: HttpRequest) -> HttpResponse:
    rows = portal_selectors.issued_revisions_for_portal(user=request.user)
    return render(
        request,
        "portal/home.html",
        {
            "projects": portal_selectors.projects_for_portal(user=request.user),
            "rows": rows,
            "revisions": [row.revision for row in rows],
            "caution": CAUTION,
        },
    )


@login_required
def portal_project(request: HttpRequest, project_id: int) -> HttpResponse:
    project = access.project_get_for_user(user=request.user, project_id=project_id)
    return render(
        request,
        "portal/project.html",
        {
            "project": project,
            "boreholes": portal_selectors.project_page(user=request.user, project=project),
            "steps": portal_selectors.SAMPLE_STEPS,
        },
    )


@login_required
def portal_test(
    request: HttpRequest, test_id: int, public_id: uuid.UUID | None = None
) -> HttpResponse:
    """A released test set's strength summary, stage results and charts, from an issued revision."""
    page = portal_selectors.strength_page(user=request.user, test_id=test_id, public_id=public_id)
    charts = {}
    if page.content is not None:
        charts = {
            "envelope": _figure(envelope_chart(page.content)),
            "shear": _figure(shear_curves_chart(page.content)),
        }
    return render(request, "portal/test.html", {"page": page, "charts": charts, "caution": CAUTION})


@login_required
def portal_revision(request: HttpRequest, public_id: str) -> HttpResponse:
    revision = selectors.revision_get_by_public_id(user=request.user, public_id=public_id)
    if revision.issued_at is None:
        raise Http404("No such record.")
    return render(
        request,
        "portal/revision.html",
        {
            "revision": revision,
            "replaced_by": selectors.replacement_of(revision),
            "current": portal_selectors.current_revision_of(user=request.user, revision=revision),
            "check": portal_selectors.revision_file_check(revision),
            "tests": [(t["test_id"], t["reference"]) for t in revision.content.get("tests", [])],
            "changes": revision.changes.all(),
            "caution": CAUTION,
        },
    )


@login_required
def portal_pdf(request: HttpRequest, public_id: str) -> FileResponse:
    revision = selectors.revision_get_by_public_id(user=request.user, public_id=public_id)
    if not revision.pdf or revision.issued_at is None:
        raise Http404("No such record.")
    return FileResponse(
        revision.pdf.open("rb"),
        as_attachment=True,
        filename=f"{revision.report.number}-rev{revision.number}.pdf",
        content_type="application/pdf",
    )


@login_required
@require_http_methods(["GET", "POST"])
def portal_verify(request: HttpRequest, public_id: str) -> HttpResponse:
    """Check an uploaded PDF against this revision: same bytes, intact lab signature."""
    revision = selectors.revision_get_by_public_id(user=request.user, public_id=public_id)
    if revision.issued_at is None:
        raise Http404("No such record.")
    form = forms.VerifyForm(request.POST or None, request.FILES or None)
    result: Verification | None = None
    matches = False
    if request.method == "POST" and form.is_valid() and form.cleaned_data.get("file"):
        upload = form.cleaned_data["file"]
        if upload.size > MAX_UPLOAD_BYTES:
            raise PermissionDenied("File too large.")
        result = verify_pdf_bytes(upload.read())
        matches = (
            result.authentic and result.revision is not None and result.revision.pk == revision.pk
        )
    return render(
        request,
        "portal/verify.html",
        {"revision": revision, "form": form, "result": result, "matches": matches},
    )
