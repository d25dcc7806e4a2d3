"""Characteristic strength parameters are printed apart from the results, under "Opinions and
interpretations" (ISO/IEC 17025 asks that opinions and interpretations be clearly identified as
such), rounded as the results are and with units; a report without them has no such section."""

from __future__ import annotations

import copy
import re

from reports.models import ReportRevision
from reports.rendering.html import render_report_html


def _text(html: str) -> str:
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html))


def test_characteristic_values_are_printed_as_an_interpretation(issued: ReportRevision) -> None:
    envelopes = [e for t in issued.content["tests"] for e in t["envelopes"] if e["characteristic"]]
    assert envelopes, "the fixture's set gives a characteristic line (3 stages)"
    text = _text(render_report_html(issued, charts=False))
    assert text.count("Opinions and interpretations") == 1
    assert text.count("INTERPRETATION — not a test result.") == len(envelopes)
    for e in envelopes:
        k = e["characteristic"]
        assert f"Characteristic c′ [kPa] {k['cohesion_kpa']:.1f}" in text
        assert f"Characteristic φ′ [°] {k['friction_angle_deg']:.1f}" in text
    assert "Confidence (one-sided) 95 %" in text
    assert "cohesion_kpa" not in text  # no raw keys


def test_a_report_without_characteristic_values_has_no_interpretation_section(
    issued: ReportRevision,
) -> None:
    content = copy.deepcopy(issued.content)
    for t in content["tests"]:
        for e in t["envelopes"]:
            e["characteristic"] = None
    issued.content = content  # in memory only: the stored revision is not touched
    text = _text(render_report_html(issued, charts=False))
    assert "Opinions and interpretations" not in text
