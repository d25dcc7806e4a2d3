"""Staff and client pages. Thin: parse, call one selector or service, render."""

from __future__ import annotations

from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from testing import access, selectors
from testing.models import SampleStatus


@login_required
def home(request: HttpRequest) -> HttpResponse:
    user = request.user
    counts = selectors.sample_status_counts(user=user)
    context = {
        "is_staff_member": access.is_lab_staff(user),
        "status_rows": [(status.label, counts[status.value]) for status in SampleStatus],
        "overdue": counts["overdue"],
        "projects": selectors.projects_for_user(user=user),
        "tests": selectors.tests_for_user(user=user).order_by("-requested_on")[:20],
    }
    return render(request, "testing/home.html", context)
