"""Step 2 of rendering: the report's HTML from a revision's frozen content and its sign-offs.

The same template serves the staff preview and the PDF. Every value comes from the snapshot; the
only queries here are the revision's sign-offs and amendment links.
"""

from __future__ import annotations

import base64
from typing import Any

from django.template.loader import render_to_string
from django.utils import timezone
from django.utils.html import format_html

from reports.models import ReportRevision, SignOffMeaning
from reports.rendering.charts import report_charts, to_svg

CAUTIONS = (
    "The results in this report relate only to the items tested, as received and as prepared "
    "for test (the specimens listed).",
    "Design parameters are for a qualified geotechnical engineer to select, under the local "
    "codes and licensed practice that apply to the project; the values here are test results, "
    "not design values.",
    "This report shall not be reproduced except in full without the written approval of the "
    "laboratory.",
)


def _svg_img(svg: str, title: str) -> str:
    data = base64.b64encode(svg.encode("utf-8")).decode("ascii")
    return format_html('<img alt="{}" src="data:image/svg+xml;base64,{}">', title, data)


def _signature_rows(revision: ReportRevision, *, issuing: bool) -> list[dict[str, Any]]:
    rows = [
        {
            "meaning": s.get_meaning_display(),
            "name": s.printed_name,
            "role": s.role,
            "at": s.signed_at,
            "content_sha256": s.content_sha256,
        }
        for s in revision.signoffs.all()
        if s.meaning != SignOffMeaning.ISSUED
    ]
    if issuing and revision.issued_by is not None:
        # The issue sign-off is written once the PDF exists; the PDF shows who issued it and when.
        rows.append(
            {
                "meaning": "Issued (authorised)",
                "name": revision.issued_by.get_full_name() or revision.issued_by.get_username(),
                "role": "Approving engineer",
                "at": revision.issue_requested_at,
                "content_sha256": revision.content_sha256,
            }
        )
    return rows


def render_context(
    revision: ReportRevision, *, issuing: bool = False, charts: bool = True
) -> dict[str, Any]:
    content = revision.content
    tests = []
    for test in content["tests"]:
        svgs = {}
        if charts:
            # Each chart as its own data: image: WeasyPrint draws an SVG image about 3x faster
            # than inline SVG, and the charts' element ids cannot clash.
            svgs = {k: _svg_img(to_svg(c), c.title) for k, c in report_charts(test).items()}
        tests.append({**test, "svg": svgs})
    issue_date = revision.issued_at or (revision.issue_requested_at if issuing else None)
    return {
        "c": content,
        "revision": revision,
        "tests": tests,
        "signatures": _signature_rows(revision, issuing=issuing),
        "issue_date": issue_date,
        "draft": not issuing and revision.state not in ("issued", "superseded"),
        "cautions": CAUTIONS,
        "generated_at": timezone.now(),
        "changes": content.get("changes", []),
        # Characteristic values are an interpretation, printed apart from the test results.
        "interpretations": [
            {"test": test["reference"], "label": e["label"], **e["characteristic"]}
            for test in content["tests"]
            for e in test["envelopes"]
            if e.get("characteristic")
        ],
    }


def render_report_html(
    revision: ReportRevision, *, issuing: bool = False, charts: bool = True
) -> str:
    return render_to_string(
        "pdf/report.html", render_context(revision, issuing=issuing, charts=charts)
    )
