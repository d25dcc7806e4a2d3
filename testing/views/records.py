"""Record pages: projects, boreholes, samples (with their lifecycle) and specimens."""

from __future__ import annotations

from typing import Any

from django.contrib import messages
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.views.decorators.http import require_POST

from testing import access, selectors, selectors_pages
from testing.forms import SampleTransitionForm
from testing.models import SampleStatus
from testing.services.errors import ServiceError
from testing.services.lifecycle import sample_transition
from testing.views.common import show_refusal, staff_page, staff_user


@staff_page
def project_list(request: HttpRequest) -> HttpResponse:
    projects = selectors.projects_for_user(user=request.user)
    return render(request, "testing/project_list.html", {"projects": projects})


@staff_page
def project_detail(request: HttpRequest, project_id: int) -> HttpResponse:
    project = access.project_get_for_user(user=request.user, project_id=project_id)
    context = {
        "project": project,
        "boreholes": selectors_pages.boreholes_of(user=request.user, project=project),
        "tests": selectors_pages.tests_of(user=request.user, project=project),
    }
    return render(request, "testing/project_detail.html", context)


@staff_page
def borehole_detail(request: HttpRequest, borehole_id: int) -> HttpResponse:
    borehole = access.borehole_get_for_user(user=request.user, borehole_id=borehole_id)
    samples = selectors_pages.samples_of(user=request.user, borehole=borehole)
    return render(
        request, "testing/borehole_detail.html", {"borehole": borehole, "samples": samples}
    )


def _sample_context(
    request: HttpRequest, sample_id: int, form: SampleTransitionForm | None
) -> dict[str, Any]:
    sample = access.sample_get_for_user(user=request.user, sample_id=sample_id)
    page = selectors_pages.sample_page(user=request.user, sample=sample)
    return {
        "sample": sample,
        "status_label": SampleStatus(sample.status).label,
        "events": page.events,
        "specimens": page.specimens,
        "form": form or SampleTransitionForm(current_status=sample.status),
    }


@staff_page
def sample_detail(request: HttpRequest, sample_id: int) -> HttpResponse:
    return render(request, "testing/sample_detail.html", _sample_context(request, sample_id, None))


@staff_page
@require_POST
def sample_move(request: HttpRequest, sample_id: int) -> HttpResponse:
    """Move a sample to its next state through the lifecycle service (which locks and records)."""
    sample = access.sample_get_for_user(user=request.user, sample_id=sample_id)
    form = SampleTransitionForm(request.POST, current_status=sample.status)
    if form.is_valid():
        try:
            sample_transition(
                sample=sample,
                to_status=form.cleaned_data["to_status"],
                user=staff_user(request),
                note=form.cleaned_data["note"],
            )
        except ServiceError as exc:
            show_refusal(request, exc)
        else:
            messages.success(
                request,
                f"Sample {sample.reference} is now {SampleStatus(sample.status).label.lower()}.",
            )
            return redirect("sample-detail", sample_id=sample.pk)
    context = _sample_context(request, sample_id, form)
    return render(request, "testing/sample_detail.html", context, status=400)


@staff_page
def specimen_detail(request: HttpRequest, specimen_id: int) -> HttpResponse:
    specimen = access.specimen_get_for_user(user=request.user, specimen_id=specimen_id)
    stage = selectors_pages.specimen_stage(specimen=specimen)
    return render(request, "testing/specimen_detail.html", {"specimen": specimen, "stage": stage})
