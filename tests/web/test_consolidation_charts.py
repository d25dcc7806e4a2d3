"""The test-set page draws each stage's consolidation both ways: Taylor's root-time construction
and Casagrande's log-time construction, with the picked times printed beside each; the values
are the core's constructions on the stage's own readings (checked by calling it directly)."""

from __future__ import annotations

import json
import re

import pytest
from django.test import Client
from django.urls import reverse

from testing import analysis
from testing.models import ConsolidationReading
from tests.conftest import Cast
from tests.web.conftest import ShearSet

pytestmark = pytest.mark.django_db


def test_each_stage_has_a_log_time_chart_with_its_construction(
    cast: Cast, shear_set_a: ShearSet
) -> None:
    client = Client()
    client.force_login(cast.technician)
    text = client.get(reverse("test-detail", args=[shear_set_a.test.pk])).content.decode()
    checked = 0
    for stage in shear_set_a.stages:
        rows = list(
            ConsolidationReading.objects.filter(stage=stage)
            .order_by("elapsed_min")
            .values_list("elapsed_min", "settlement_mm")
        )
        if len(rows) < 4:
            continue
        checked += 1
        expected = analysis.casagrande_log_time([r[0] for r in rows], [r[1] for r in rows])
        chart_id = f"chart-cons-log-{stage.stage_number}"
        assert f'id="{chart_id}"' in text
        assert f"t100 = {expected.t100_min:.2f} min" in text
        figure = re.search(
            rf'<script id="{chart_id}" type="application/json">(.*?)</script>', text, re.S
        )
        assert figure is not None, chart_id  # the chart's data: a log time axis and both lines
        data = json.loads(figure.group(1))
        assert data["layout"]["xaxis"]["type"] == "log"
        names = {trace.get("name") for trace in data["data"]}
        assert {"Primary tangent", "Secondary line", "Construction points"} <= names
    assert checked == len(shear_set_a.stages)
