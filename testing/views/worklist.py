"""The overview (home) and the lab's worklist by state."""

from __future__ import annotations

from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.utils import timezone

from testing import access, selectors, selectors_worklist
from testing.models import SampleStatus
from testing.views.common import CAUTION, optional_url, staff_page


@login_required
def home(request: HttpRequest) -> HttpResponse:
    """Counts by state and the projects and test sets the user may see (staff and clients)."""
    user = request.user
    portal = optional_url("portal:home")
    if portal and not access.is_lab_staff(user):
        return redirect(portal)  # clients live in the portal
    counts = selectors.sample_status_counts(user=user)
    context = {
        "is_staff_member": access.is_lab_staff(user),
        "status_rows": [(status.label, counts[status.value]) for status in SampleStatus],
        "overdue": counts["overdue"],
        "projects": selectors.projects_for_user(user=user),
        "tests": selectors.tests_for_user(user=user).order_by("-requested_on")[:20],
        "caution": CAUTION,
    }
    return render(request, "testing/home.html", context)


@staff_page
def worklist(request: HttpRequest) -> HttpResponse:
    columns = selectors_worklist.worklist_for_user(user=request.user)
    return render(
        request,
        "testing/worklist.html",
        {
            "columns": columns,
            "limit": selectors_worklist.WORKLIST_LIMIT,
            "today": timezone.localdate(),
        },
    )
