"""Benchmark: list 200 stage results through the API against a bare ``values()`` query plus
``json.dumps`` of the same fields, in the same run.

Run: ``.venv/bin/python benchmarks/bench_api.py``. Prints
``bench api_stage_results: <ms> ms; baseline <ms> ms; ratio <r> (target <= 3)``; exit status 1 if
the target is missed. The API request is a real one: token authentication, permission and scoping,
throttling, filtering, pagination (COUNT + page), serialization and JSON rendering. It runs on a
throw-away test database (SQLite in memory unless ``DATABASE_URL`` is set).
"""

from __future__ import annotations

import json
import os
import sys
import time
from collections.abc import Callable
from datetime import date
from decimal import Decimal
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "labsite.settings")

import django

django.setup()

from django.conf import settings  # noqa: E402
from django.db import connection  # noqa: E402
from django.test.utils import setup_test_environment  # noqa: E402

SMOKE = "--smoke" in sys.argv  # tiny sizes, no target: checks that the benchmark still runs
N_RESULTS = 10 if SMOKE else 200
STAGES_PER_SET = 5
TARGET = 3.0


def best_of(
    fn: Callable[[], object], baseline: Callable[[], object], repeats: int
) -> tuple[float, float]:
    """Best wall times [s] of ``fn`` and ``baseline``, interleaved so load changes hit both."""
    best_fn = best_base = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        t1 = time.perf_counter()
        baseline()
        t2 = time.perf_counter()
        best_fn, best_base = min(best_fn, t1 - t0), min(best_base, t2 - t1)
    return best_fn, best_base


def build_records() -> object:
    """A technician and 200 stages (40 sets of 5), each with one stored result row."""
    from testing.models import (
        Borehole,
        ComputationRun,
        Organisation,
        Project,
        Role,
        RunKind,
        RunState,
        StageResult,
    )
    from testing.services.accounts import lab_user_create
    from testing.services.records import sample_receive, specimen_create
    from testing.services.shear_setup import shear_test_create, stage_create

    user = lab_user_create(username="bench-tech", password="bench-pass-1", roles=[Role.TECHNICIAN])
    org = Organisation.objects.create(name="Fenwick Brae Consulting Engineers", code="fenwick")
    project = Project.objects.create(organisation=org, reference="TL-2026-014", name="Harlow Moss")
    borehole = Borehole.objects.create(project=project, reference="BH101")
    sample = sample_receive(
        user=user,
        borehole=borehole,
        reference="U1",
        depth_top_m=Decimal("2.00"),
        depth_base_m=Decimal("2.45"),
        sample_type="U",
        received_on=date(2026, 11, 2),
    )
    for set_index in range(N_RESULTS // STAGES_PER_SET):
        test = shear_test_create(
            user=user,
            project=project,
            reference=f"DS-{set_index + 1:02d}",
            method="bs-1377-7",
            box_length_mm=60.0,
            box_width_mm=60.0,
            requested_on=date(2026, 11, 3),
        )
        for number in range(1, STAGES_PER_SET + 1):
            specimen = specimen_create(
                user=user,
                sample=sample,
                reference=f"S{set_index}-{number}",
                depth_top_m=Decimal("2.05"),
                preparation="undisturbed",
                length_mm=60.0,
                width_mm=60.0,
                height_mm=20.0,
                initial_mass_g=140.0,
            )
            stage = stage_create(
                user=user,
                test=test,
                specimen=specimen,
                stage_number=number,
                loading="frame",
                applied_normal_stress_kpa=50.0 * number,
            )
            run = ComputationRun.objects.create(
                kind=RunKind.STAGE_REDUCTION,
                subject_key=f"stage:{stage.pk}",
                test=test,
                stage=stage,
                state=RunState.SUCCEEDED,
                reason="benchmark",
            )
            StageResult.objects.create(
                run=run,
                stage=stage,
                analysis_version="bench",
                inputs_hash="0" * 64,
                area_model="nominal",
                n_readings=300,
                normal_force_n=180.0 * number,
                initial_normal_stress_kpa=50.0 * number,
                failure_criterion="peak",
                failure_shear_stress_kpa=30.0 * number,
                failure_normal_stress_kpa=50.0 * number,
                failure_horizontal_mm=4.1,
                failure_vertical_mm=0.2,
                failure_secant_phi_deg=31.0,
                phase={"initial": {"bulk_density_mg_m3": 1.95}},
                flags=[{"code": "rate", "severity": "info", "message": "ok", "values": {}}],
            )
    return user


def main() -> int:
    from knox.models import AuthToken
    from rest_framework.test import APIClient

    from testing.api.serializers.results import STAGE_RESULT_FIELDS
    from testing.models import StageResult

    settings.DEBUG = False  # no query log: measure what production does
    setup_test_environment()
    connection.creation.create_test_db(verbosity=0)
    user = build_records()
    _, token = AuthToken.objects.create(user=user)
    client = APIClient()
    client.credentials(HTTP_AUTHORIZATION=f"Token {token}")
    settings.TAULINE_API_THROTTLE_RATES = {"anon": "1/day", "user": "100000/hour", "token": "1/day"}

    def through_api() -> bytes:
        response = client.get("/api/v1/stage-results/", {"page_size": N_RESULTS})
        assert response.status_code == 200, response.content[:200]
        return response.content

    related = [
        "stage__stage_number",
        "stage__test_id",
        "stage__test__reference",
        "stage__specimen_id",
        "stage__specimen__reference",
    ]

    def values_and_dumps() -> str:
        rows = list(
            StageResult.objects.order_by("stage__test_id", "stage__stage_number", "-id").values(
                *STAGE_RESULT_FIELDS, *related
            )[:N_RESULTS]
        )
        assert len(rows) == N_RESULTS
        return json.dumps(rows, default=str)

    assert len(json.loads(through_api())["results"]) == N_RESULTS  # also warms up both paths
    values_and_dumps()
    api_s, base_s = best_of(through_api, values_and_dumps, repeats=15)
    ratio = api_s / base_s
    print(
        f"bench api_stage_results: {api_s * 1000:.1f} ms; baseline {base_s * 1000:.1f} ms; "
        f"ratio {ratio:.2f} (target <= {TARGET:g})"
    )
    return 0 if SMOKE or ratio <= TARGET else 1


if __name__ == "__main__":
    sys.exit(main())
