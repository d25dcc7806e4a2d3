"""The lab manager's dashboard: throughput, backlog, turnaround, overdue work, work per person."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from testing import selectors_dashboard
from testing.selectors_dashboard import Dashboard, TurnaroundRow, WeekRow
from testing.views.charts import PALETTE, Figure, layout_for
from testing.views.common import manager_page

# --- Figures (Plotly JSON; each chart has a table under it on the page) -------------------------


def _integer_axis(layout: dict[str, Any], largest: int) -> dict[str, Any]:
    """Counts: whole-number ticks, about eight of them."""
    layout["yaxis"]["dtick"] = max(1, math.ceil(largest / 8))
    layout["yaxis"]["rangemode"] = "tozero"
    return layout


def weekly_figure(weeks: Sequence[WeekRow]) -> Figure:
    labels = [w.week_start.isoformat() for w in weeks]
    return {
        "data": [
            {
                "type": "bar",
                "name": "Received",
                "x": labels,
                "y": [w.received for w in weeks],
                "marker": {"color": PALETTE[0]},
                "hovertemplate": "Week of %{x}<br>%{y} samples received<extra></extra>",
            },
            {
                "type": "bar",
                "name": "Reported",
                "x": labels,
                "y": [w.reported for w in weeks],
                "marker": {"color": PALETTE[1]},
                "hovertemplate": "Week of %{x}<br>%{y} samples reported<extra></extra>",
            },
        ],
        "layout": _week_ticks(
            _integer_axis(
                layout_for("Week starting (Monday)", "Samples (count)", barmode="group"),
                max([w.received for w in weeks] + [w.reported for w in weeks] + [1]),
            ),
            weeks,
        ),
    }


def _week_ticks(layout: dict[str, Any], weeks: Sequence[WeekRow]) -> dict[str, Any]:
    """Tick each bar group at its own Monday (a date axis would otherwise pick Sundays), every
    other week when there are many, labelled "14 Sep"."""
    step = 2 if len(weeks) > 8 else 1
    shown = list(weeks)[::step]
    layout["xaxis"]["tickmode"] = "array"
    layout["xaxis"]["tickvals"] = [w.week_start.isoformat() for w in shown]
    layout["xaxis"]["ticktext"] = [f"{w.week_start.day} {w.week_start:%b}" for w in shown]
    return layout


def backlog_figure(dashboard: Dashboard) -> Figure:
    rows = dashboard.backlog
    return {
        "data": [
            {
                "type": "bar",
                "orientation": "h",
                "x": [r.count for r in rows],
                "y": [r.label for r in rows],
                "marker": {"color": PALETTE[2]},
                "hovertemplate": "%{y}: %{x} samples<extra></extra>",
                "showlegend": False,
            }
        ],
        "layout": layout_for(
            "Open samples (count)",
            "",
            yaxis={"autorange": "reversed", "automargin": True},
            height=300,
        ),
    }


def turnaround_figure(rows: Sequence[TurnaroundRow]) -> Figure:
    labels = [r.month.strftime("%Y-%m") for r in rows]
    return {
        "data": [
            {
                "type": "scatter",
                "mode": "lines+markers",
                "name": "Median",
                "x": labels,
                "y": [r.median_days for r in rows],
                "line": {"color": PALETTE[0], "width": 2},
                "hovertemplate": "%{x}: median %{y:.1f} days<extra></extra>",
            },
            {
                "type": "scatter",
                "mode": "lines+markers",
                "name": "90th percentile",
                "x": labels,
                "y": [r.p90_days for r in rows],
                "line": {"color": PALETTE[4], "width": 2, "dash": "dash"},
                "hovertemplate": "%{x}: 90th percentile %{y:.1f} days<extra></extra>",
            },
        ],
        "layout": layout_for(
            "Month reported", "Turnaround (days, receipt to report)", xaxis={"type": "category"}
        ),
    }


def technician_figure(dashboard: Dashboard) -> Figure:
    rows = dashboard.technicians
    names = [r.name for r in rows]
    series = [
        ("Received", "received"),
        ("Scheduled", "scheduled"),
        ("Started testing", "started"),
        ("Tested", "tested"),
        ("Reported", "reported"),
        ("Held, disposed or sent back", "other"),
    ]
    return {
        "data": [
            {
                "type": "bar",
                "name": label,
                "x": names,
                "y": [getattr(r, attr) for r in rows],
                "marker": {"color": PALETTE[i % len(PALETTE)]},
                "hovertemplate": f"%{{x}}: %{{y}} {label.lower()}<extra></extra>",
            }
            for i, (label, attr) in enumerate(series)
        ],
        "layout": _integer_axis(
            layout_for("Person", "Lifecycle moves (count)", barmode="stack"),
            max([r.total for r in rows] + [1]),
        ),
    }


@manager_page
def dashboard(request: HttpRequest) -> HttpResponse:
    figures = selectors_dashboard.dashboard_cached(user=request.user)
    context = {
        "d": figures,
        "weekly_chart": weekly_figure(figures.weeks),
        "backlog_chart": backlog_figure(figures),
        "turnaround_chart": turnaround_figure(figures.turnaround),
        "technician_chart": technician_figure(figures),
        "backlog_total": sum(row.count for row in figures.backlog),
        "weekly_totals": (
            sum(w.received for w in figures.weeks),
            sum(w.reported for w in figures.weeks),
        ),
    }
    return render(request, "testing/dashboard.html", context)
