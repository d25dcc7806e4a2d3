"""The permitted rate uses the displacement expected at failure the lab gives for the set, else
the method's: v_max = d_f / t_f with t_f = 12.7 · t100 for BS 1377-7 (the drained shear-box time
to failure, from memory of the standard and its common use)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from testing.analysis.profiles import BS_1377_7_1990
from testing.models import DirectShearTest
from testing.selectors import latest_stage_results
from tests.conftest import Cast, Records
from tests.reports.conftest import build_test_set, compute

pytestmark = pytest.mark.django_db


def _limits(test: DirectShearTest) -> list[dict[str, Any]]:
    return [r.phase["rate_limit"] for r in latest_stage_results(test=test).values()]


def test_the_labs_displacement_at_failure_sets_the_permitted_rate(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = build_test_set(user=cast.technician, project=records_a.project, sample=records_a.sample)
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    default = _limits(test)
    assert default
    for limit in default:
        assert limit["displacement_at_failure_mm"] == BS_1377_7_1990.displacement_at_failure_mm
        assert limit["time_to_failure_min"] == pytest.approx(12.7 * limit["basis_time_min"])
        assert limit["max_rate_mm_per_min"] == pytest.approx(
            limit["displacement_at_failure_mm"] / limit["time_to_failure_min"]
        )

    DirectShearTest.objects.filter(pk=test.pk).update(expected_failure_displacement_mm=2.0)
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    given = _limits(test)
    for limit in given:
        assert limit["displacement_at_failure_mm"] == 2.0
        assert limit["max_rate_mm_per_min"] == pytest.approx(2.0 / limit["time_to_failure_min"])
    assert sorted(g["max_rate_mm_per_min"] for g in given) == pytest.approx(
        sorted(d["max_rate_mm_per_min"] * 2.0 / d["displacement_at_failure_mm"] for d in default)
    )
