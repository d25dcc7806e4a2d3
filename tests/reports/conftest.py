"""Fixtures for the report tests: a computed three-stage test set, and a report at each state.

The readings are the seeded synthetic dense sand of the demo (invented data); the results come
from the real computation path, so reports are built from genuine result rows.
"""

from __future__ import annotations

import tempfile
from collections.abc import Callable, Iterator
from datetime import date, timedelta
from decimal import Decimal
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.utils import timezone

from labsite.celery import app as celery_app
from reports import services
from reports.models import ReportRevision
from testing.demo.synthetic import consolidation_readings, demo_parameters, shear_readings
from testing.models import DirectShearTest, ForceUnit, Project, Sample
from testing.services import computation
from testing.services.records import specimen_create
from testing.services.shear_setup import shear_test_create, stage_create, stage_readings_store
from tests.conftest import PASSWORD, Cast, Records

NORMAL_STRESSES_KPA = (50.0, 100.0, 200.0)
BOX_MM = 60.0
DIRECT_MASS_KG, HANGER_MASS_KG, LEVER_RATIO, RING_N_PER_DIV = 1.25, 0.5, 10.0, 1.52


@pytest.fixture(autouse=True)
def _media_root_and_eager_tasks(settings: Any) -> Iterator[None]:
    """Rendered PDFs and the self-signed lab key go to a throw-away folder; background tasks run
    in-process even when REDIS_URL is set (no worker runs during these tests)."""
    app = celery_app
    eager = app.conf.task_always_eager
    app.conf.task_always_eager = True
    settings.CELERY_TASK_ALWAYS_EAGER = True
    with tempfile.TemporaryDirectory(prefix="tauline-media-") as folder:
        settings.MEDIA_ROOT = folder
        settings.TAULINE_SIGNING_KEY_FILE = ""
        settings.TAULINE_SIGNING_CERT_FILE = ""
        yield
    app.conf.task_always_eager = eager


def _weights_kg(sigma_kpa: float) -> float:
    mass_kg = sigma_kpa * BOX_MM * BOX_MM / 1000.0 / 9.80665
    return round((mass_kg - DIRECT_MASS_KG) / LEVER_RATIO - HANGER_MASS_KG, 3)


def build_test_set(
    *, user: User, project: Project, sample: Sample, reference: str = "DS-01", text: str = ""
) -> DirectShearTest:
    """A three-stage dense sand set with readings; ``text`` goes into every free-text field."""
    params = demo_parameters()["dense_sand"]
    test = shear_test_create(
        user=user,
        project=project,
        reference=reference,
        method="bs-1377-7",
        apparatus=f"SB-2 (60 mm){text}"[:80],
        box_length_mm=BOX_MM,
        box_width_mm=BOX_MM,
        requested_on=date(2026, 11, 3),
        instructions=f"Peak strength.{text}",
    )
    for number, sigma in enumerate(NORMAL_STRESSES_KPA, start=1):
        dry = round(1.74 * BOX_MM * BOX_MM * 20.0 / 1000.0, 2)
        specimen = specimen_create(
            user=user,
            sample=sample,
            reference=f"S{number}{reference}",
            depth_top_m=Decimal("1.20"),
            preparation="recompacted",
            target_dry_density_mg_m3=Decimal("1.750"),
            length_mm=BOX_MM,
            width_mm=BOX_MM,
            height_mm=20.0,
            initial_mass_g=round(dry * 1.11, 2),
            dry_mass_g=dry,
            final_mass_g=round(dry * 1.19, 2),
            max_particle_size_mm=2.0,
            particle_density_mg_m3=2.65,
            particle_density_assumed=True,
            description=f"Dense brown sand{text}",
            preparation_notes=text,
        )
        stage = stage_create(
            user=user,
            test=test,
            specimen=specimen,
            stage_number=number,
            direct_mass_kg=DIRECT_MASS_KG,
            hanger_mass_kg=HANGER_MASS_KG,
            weights_mass_kg=_weights_kg(sigma),
            lever_ratio=LEVER_RATIO,
            force_unit=ForceUnit.DIVISIONS,
            force_factor_n_per_unit=RING_N_PER_DIV,
            rate_mm_per_min=params.rate_mm_per_min,
            notes=text,
            shear_started_at=timezone.now() - timedelta(days=3),
        )
        cons = consolidation_readings(
            seed=100 + number,
            normal_stress_kpa=sigma,
            height_mm=20.0,
            t50_min=params.t50_min,
            final_settlement_mm=params.settlement_per_100_kpa_mm * sigma / 100.0,
        )
        shear = shear_readings(
            seed=100 + number,
            soil=params.soil,
            normal_stress_kpa=sigma,
            rate_mm_per_min=params.rate_mm_per_min,
            phi_peak_deg=params.phi_peak_deg,
            phi_cv_deg=params.phi_cv_deg,
            cohesion_kpa=params.cohesion_kpa,
            displacement_to_peak_mm=params.displacement_to_peak_mm,
            max_dilation_deg=params.max_dilation_deg,
            contraction_mm=params.contraction_mm,
            ring_constant_n_per_div=RING_N_PER_DIV,
        )
        assert shear.ring_divisions is not None
        stage_readings_store(
            user=user,
            stage=stage,
            consolidation=[
                (float(t), float(s))
                for t, s in zip(cons.elapsed_min, cons.settlement_mm, strict=True)
            ],
            shear=[
                (1, i, float(t), float(x), float(y), float(f))
                for i, (t, x, y, f) in enumerate(
                    zip(
                        shear.elapsed_min,
                        shear.horizontal_mm,
                        shear.vertical_mm,
                        shear.ring_divisions,
                        strict=True,
                    ),
                    start=1,
                )
            ],
        )
    return test


def compute(test: DirectShearTest, user: User, capture: Callable[..., Any]) -> None:
    """Run the real stage reductions and envelope fits in-process."""
    for _ in range(4):  # envelopes are requested when the stage runs finish, on their own commit
        with capture(execute=True):
            computation.test_recompute_request(test=test, user=user, reason="report test")
        if test.envelopes.exists():
            return
    raise AssertionError("no envelope was computed")


@pytest.fixture
def computed_set(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> DirectShearTest:
    test = build_test_set(user=cast.technician, project=records_a.project, sample=records_a.sample)
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    return test


def issue(
    revision: ReportRevision, user: User, capture: Callable[..., Any], password: str = PASSWORD
) -> ReportRevision:
    """Issue and run the render task (on commit), as the web request would."""
    with capture(execute=True):
        services.revision_issue(user=user, revision=revision, password=password)
    revision.refresh_from_db()
    return revision


@pytest.fixture
def draft(cast: Cast, records_a: Records, computed_set: DirectShearTest) -> ReportRevision:
    return services.report_create(
        user=cast.technician, project=records_a.project, tests=[computed_set]
    )


@pytest.fixture
def issued(
    cast: Cast, draft: ReportRevision, django_capture_on_commit_callbacks: Callable[..., Any]
) -> ReportRevision:
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=draft, password=PASSWORD)
    return issue(draft, cast.approver, django_capture_on_commit_callbacks)
