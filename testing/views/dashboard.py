"""The lab manager's dashboard: throughput, backlog, turnaround, overdue work, work per person."""

from __future__ import annotations

from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from testing import selectors_dashboard
from testing.views import charts
from testing.views.common import manager_page


@manager_page
def dashboard(request: HttpRequest) -> HttpResponse:
    figures = selectors_dashboard.dashboard_for_user(user=request.user)
    context = {
        "d": figures,
        "weekly_chart": charts.weekly_figure(figures.weeks),
        "backlog_chart": charts.backlog_figure(figures),
        "turnaround_chart": charts.turnaround_figure(figures.turnaround),
        "technician_chart": charts.technician_figure(figures),
        "backlog_total": sum(row.count for row in figures.backlog),
        "weekly_totals": (
            sum(w.received for w in figures.weeks),
            sum(w.reported for w in figures.weeks),
        ),
    }
    return render(request, "testing/dashboard.html", context)
