"""A world for API tests: for each client organisation a full record tree with a released test set,
its stages, readings, results and an envelope; plus an unreleased test set for client A.

Results rows here are fixtures for access tests (made directly, not computed): these tests check who
sees what, not the numbers.

``world`` also gives each organisation reports, taken through the sign-off services by the
personas: one issued (rendered and signed in-process, with its PDF), and one each waiting to be
checked, approved and issued. Issuing costs seconds, so tests that never touch reports use
``plain_world`` (the same records without reports).
"""

from __future__ import annotations

import itertools
import tempfile
from collections.abc import Callable, Iterator
from dataclasses import dataclass, replace
from datetime import date, timedelta
from decimal import Decimal
from typing import Any

import numpy as np
import pytest
from django.contrib.auth.models import User
from django.utils import timezone
from knox.models import AuthToken
from rest_framework.test import APIClient

from labsite.celery import app as celery_app
from reports import services as report_services
from reports.models import Report, ReportRevision, RevisionState
from testing.models import (
    Apparatus,
    CalibrationRecord,
    ComputationRun,
    ConsolidationReading,
    DirectShearTest,
    DisplacementGauge,
    EnvelopeResult,
    ForceDevice,
    Organisation,
    Project,
    RunKind,
    RunState,
    Sample,
    ShearStage,
    Specimen,
    StageResult,
)
from testing.selectors_readings import ShearColumns
from testing.services import equipment
from testing.services.readings_store import write_shear_columns
from testing.services.records import specimen_create
from testing.services.release import test_mark_released
from testing.services.shear_setup import shear_test_create, stage_create
from testing.services.stage_inputs import stage_inputs_load
from tests.conftest import PASSWORD, Cast, Records

PERSONAS = (
    "anonymous",
    "client_a",
    "client_b",
    "technician",
    "checker",
    "approver",
    "manager",
    "deactivated",
)

_cache_ids = itertools.count()


@pytest.fixture(autouse=True)
def _isolated_throttles(settings: Any) -> None:
    """Each test gets its own in-memory cache (throttle counters) and generous rates; the
    throttle tests set their own rates."""
    settings.CACHES = {
        "default": {
            "BACKEND": "django.core.cache.backends.locmem.LocMemCache",
            "LOCATION": f"api-tests-{next(_cache_ids)}",
        }
    }
    settings.TAULINE_API_THROTTLE_RATES = {
        "anon": "100000/hour",
        "user": "100000/hour",
        "token": "100000/hour",
    }


@dataclass(frozen=True)
class OrgWorld:
    organisation: Organisation
    project: Project
    borehole: Any
    sample: Sample
    specimen: Specimen
    test: DirectShearTest
    stage: ShearStage
    run: ComputationRun
    result: StageResult
    envelope: EnvelopeResult
    open_test: DirectShearTest  # not released: clients must not see it
    spare_specimen: Specimen  # not yet in a stage
    open_stage: ShearStage  # stage 2 of ``open_test`` (load cell, N): its readings may change
    # The equipment register is the lab's, not a client's: each side's records are named after it.
    apparatus: Apparatus
    force_device: ForceDevice
    calibration: CalibrationRecord
    gauge: DisplacementGauge
    # Reports of ``test`` (``world`` only; None in ``plain_world``):
    report: Report | None = None  # the report holding the issued revision
    revision: ReportRevision | None = None  # issued, with its signed PDF
    draft_revision: ReportRevision | None = None  # waiting to be checked
    checked_revision: ReportRevision | None = None  # waiting to be approved
    approved_revision: ReportRevision | None = None  # waiting to be issued


@dataclass(frozen=True)
class World:
    cast: Cast
    a: OrgWorld
    b: OrgWorld


def _specimen(cast: Cast, sample: Sample, reference: str) -> Specimen:
    return specimen_create(
        user=cast.technician,
        sample=sample,
        reference=reference,
        depth_top_m=Decimal("1.25"),
        preparation="undisturbed",
        shape="square",
        length_mm=60.0,
        width_mm=60.0,
        height_mm=20.0,
        initial_mass_g=140.0,
    )


def _test_set(cast: Cast, project: Project, reference: str) -> DirectShearTest:
    return shear_test_create(
        user=cast.technician,
        project=project,
        reference=reference,
        method="bs-1377-7",
        box_length_mm=60.0,
        box_width_mm=60.0,
        requested_on=date(2026, 11, 3),
    )


def _stage(cast: Cast, test: DirectShearTest, specimen: Specimen) -> ShearStage:
    stage = stage_create(
        user=cast.technician,
        test=test,
        specimen=specimen,
        stage_number=1,
        direct_mass_kg=1.0,
        hanger_mass_kg=2.0,
        weights_mass_kg=5.0,
        lever_ratio=10.0,
    )
    ConsolidationReading.objects.bulk_create(
        ConsolidationReading(stage=stage, elapsed_min=t, settlement_mm=0.01 * t) for t in range(3)
    )
    seq = np.arange(1, 4, dtype=np.int64)
    write_shear_columns(
        stage.pk,
        ShearColumns(
            traverse=np.ones(3, dtype=np.int64),
            seq=seq,
            elapsed_min=np.array([0.5 * i for i in range(1, 4)], dtype=np.float64),
            horizontal_mm=np.array([0.1 * i for i in range(1, 4)], dtype=np.float64),
            vertical_mm=np.zeros(3, dtype=np.float64),
            force_reading=np.array([10.0 * i for i in range(1, 4)], dtype=np.float64),
        ),
    )
    return stage


def make_result_rows(stage: ShearStage, *, at: Any = None) -> tuple[ComputationRun, StageResult]:
    run = ComputationRun.objects.create(
        kind=RunKind.STAGE_REDUCTION,
        subject_key=f"stage:{stage.pk}",
        test=stage.test,
        stage=stage,
        state=RunState.SUCCEEDED,
        reason="fixture",
    )
    result = StageResult.objects.create(
        run=run,
        stage=stage,
        analysis_version="fixture",
        inputs_hash=stage_inputs_load(stage).digest(),  # as if computed from these readings
        area_model="nominal",
        n_readings=3,
        normal_force_n=785.0,
        initial_normal_stress_kpa=218.0,
        failure_criterion="peak",
        failure_shear_stress_kpa=120.0,
        failure_normal_stress_kpa=218.0,
        failure_horizontal_mm=0.3,
        failure_vertical_mm=0.0,
        failure_secant_phi_deg=28.8,
    )
    if at is not None:
        StageResult.objects.filter(pk=result.pk).update(created_at=at)
        result.refresh_from_db()
    return run, result


def make_envelope_rows(test: DirectShearTest) -> EnvelopeResult:
    run = ComputationRun.objects.create(
        kind=RunKind.ENVELOPE_FIT,
        subject_key=f"test:{test.pk}:peak",
        test=test,
        envelope_type="peak",
        state=RunState.SUCCEEDED,
        reason="fixture",
    )
    return EnvelopeResult.objects.create(
        run=run,
        test=test,
        envelope_type="peak",
        analysis_version="fixture",
        inputs_hash="0" * 64,
        fit_method="ordinary least squares",
        points=[],
        n=3,
        cohesion_kpa=5.0,
        friction_angle_deg=30.0,
        tan_phi=0.577,
        normal_stress_min_kpa=50.0,
        normal_stress_max_kpa=200.0,
    )


def _open_stage(cast: Cast, test: DirectShearTest, specimen: Specimen) -> ShearStage:
    return stage_create(
        user=cast.technician,
        test=test,
        specimen=specimen,
        stage_number=2,
        loading="frame",
        applied_normal_stress_kpa=100.0,
        force_unit="N",
    )


def _equipment(cast: Cast, prefix: str) -> dict[str, Any]:
    apparatus = equipment.apparatus_create(
        user=cast.manager, reference=f"SB-{prefix}", box_length_mm=60.0, box_width_mm=60.0
    )
    device = equipment.force_device_create(
        user=cast.manager,
        reference=f"LC-{prefix}",
        kind="load_cell",
        capacity_n=5000.0,
        reading_unit="N",
        apparatus=apparatus,
    )
    calibration = equipment.calibration_record_create(
        user=cast.manager,
        device=device,
        certificate_number=f"CAL-{prefix}-1",
        issuing_lab="Calibration lab",
        calibrated_on=date(2026, 1, 10),
        due_on=date(2027, 1, 10),
        model="linear",
        coefficients=[1.0],
        range_min=0.0,
        range_max=5000.0,
    )
    gauge = equipment.gauge_create(
        user=cast.manager,
        reference=f"DG-{prefix}",
        kind="dial",
        axis="horizontal",
        factor_mm_per_unit=0.01,
        apparatus=apparatus,
    )
    return {
        "apparatus": apparatus,
        "force_device": device,
        "calibration": calibration,
        "gauge": gauge,
    }


def org_world(cast: Cast, records: Records, prefix: str) -> OrgWorld:
    specimen = _specimen(cast, records.sample, "S1")
    test = _test_set(cast, records.project, f"DS-{prefix}")
    stage = _stage(cast, test, specimen)
    run, result = make_result_rows(stage)
    envelope = make_envelope_rows(test)
    test_mark_released(test=test, at=timezone.now() + timedelta(seconds=1))
    open_test = _test_set(cast, records.project, f"DS-{prefix}-OPEN")
    open_stage = _open_stage(cast, open_test, _specimen(cast, records.sample, "S3"))
    return OrgWorld(
        organisation=records.project.organisation,
        project=records.project,
        borehole=records.borehole,
        sample=records.sample,
        specimen=specimen,
        test=test,
        stage=stage,
        run=run,
        result=result,
        envelope=envelope,
        open_test=open_test,
        spare_specimen=_specimen(cast, records.sample, "S2"),
        open_stage=open_stage,
        **_equipment(cast, prefix),
    )


@pytest.fixture
def plain_world(cast: Cast, records_a: Records, records_b: Records) -> World:
    """The records of both organisations, without reports."""
    return World(cast=cast, a=org_world(cast, records_a, "A"), b=org_world(cast, records_b, "B"))


@pytest.fixture
def report_media(settings: Any) -> Iterator[None]:
    """Rendered PDFs and the self-signed lab key go to a throw-away folder; the render task runs
    in-process even when REDIS_URL is set (no worker runs during these tests)."""
    eager = celery_app.conf.task_always_eager
    celery_app.conf.task_always_eager = True
    settings.CELERY_TASK_ALWAYS_EAGER = True
    with tempfile.TemporaryDirectory(prefix="tauline-api-media-") as folder:
        settings.MEDIA_ROOT = folder
        settings.TAULINE_SIGNING_KEY_FILE = ""
        settings.TAULINE_SIGNING_CERT_FILE = ""
        yield
    celery_app.conf.task_always_eager = eager


def with_reports(cast: Cast, side: OrgWorld, capture: Callable[..., Any]) -> OrgWorld:
    """Reports of ``side.test`` at each sign-off state, made by the personas through the services
    (technician prepares, checker checks, approver approves and issues)."""

    def prepared() -> ReportRevision:
        return report_services.report_create(
            user=cast.technician, project=side.project, tests=[side.test]
        )

    def checked() -> ReportRevision:
        return report_services.revision_check(
            user=cast.checker, revision=prepared(), password=PASSWORD
        )

    def approved() -> ReportRevision:
        return report_services.revision_approve(
            user=cast.approver, revision=checked(), password=PASSWORD
        )

    to_issue = approved()
    with capture(execute=True):  # the render task runs on commit, as after a web request
        report_services.revision_issue(user=cast.approver, revision=to_issue, password=PASSWORD)
    issued = ReportRevision.objects.get(pk=to_issue.pk)
    assert issued.state == RevisionState.ISSUED and issued.pdf, issued.render_error
    return replace(
        side,
        report=issued.report,
        revision=issued,
        draft_revision=prepared(),
        checked_revision=checked(),
        approved_revision=approved(),
    )


@pytest.fixture
def world(
    plain_world: World,
    report_media: None,
    django_capture_on_commit_callbacks: Callable[..., Any],
) -> World:
    """``plain_world`` plus each organisation's reports (one issued, one at each earlier state)."""
    cast, capture = plain_world.cast, django_capture_on_commit_callbacks
    return replace(
        plain_world,
        a=with_reports(cast, plain_world.a, capture),
        b=with_reports(cast, plain_world.b, capture),
    )


def persona_user(cast: Cast, persona: str) -> User | None:
    return None if persona == "anonymous" else getattr(cast, persona)


def token_client(user: User | None) -> APIClient:
    """A client signed with an API token, as a script would be (knox issues tokens to inactive
    users too when asked directly; the API refuses them)."""
    client = APIClient()
    if user is not None:
        _, token = AuthToken.objects.create(user=user)
        client.credentials(HTTP_AUTHORIZATION=f"Token {token}")
    return client


@pytest.fixture
def clients(cast: Cast) -> dict[str, APIClient]:
    return {persona: token_client(persona_user(cast, persona)) for persona in PERSONAS}
