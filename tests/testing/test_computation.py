"""Computation runs in-process: results stored with version and inputs, reuse, claims, the sweeper."""

from __future__ import annotations

import math
from datetime import timedelta
from io import StringIO
from typing import Any
from unittest import mock

import numpy as np
import pytest
from django.core.management import call_command
from django.db import OperationalError, transaction
from django.utils import timezone

from testing import analysis, selectors
from testing.models import (
    ComputationRun,
    DirectShearTest,
    EnvelopeResult,
    OutboxMessage,
    RunKind,
    RunState,
    ShearReadingBlock,
    StageResult,
)
from testing.services import computation
from testing.services.demo import load_demo
from testing.services.errors import ServiceError


@pytest.fixture
def demo(db: None, django_capture_on_commit_callbacks: Any) -> dict[str, Any]:
    load_demo()
    from django.contrib.auth.models import User

    return {
        "sand": DirectShearTest.objects.get(reference="DS-01"),
        "clay": DirectShearTest.objects.get(reference="DS-02"),
        "technician": User.objects.get(username="technician"),
        "checker": User.objects.get(username="checker"),
        "capture": django_capture_on_commit_callbacks,
    }


def _recompute(
    demo: dict[str, Any], test: DirectShearTest, reason: str = "test"
) -> list[ComputationRun]:
    with demo["capture"](execute=True):
        runs = computation.test_recompute_request(test=test, user=demo["technician"], reason=reason)
    return runs


def test_recompute_reduces_every_stage_and_fits_the_peak_envelope(demo: dict[str, Any]) -> None:
    sand = demo["sand"]
    runs = _recompute(demo, sand)
    assert {r.kind for r in runs} == {RunKind.STAGE_REDUCTION}
    for run in ComputationRun.objects.filter(test=sand):
        assert run.state == RunState.SUCCEEDED, run.error
        assert run.analysis_version == analysis.ANALYSIS_VERSION
        assert len(run.inputs_hash) == 64
        assert run.progress_pct == 100
    results = selectors.latest_stage_results(test=sand)
    assert len(results) == 3
    for result in results.values():
        assert result.analysis_version == analysis.ANALYSIS_VERSION
        assert result.failure_criterion == "peak"
        # The demo sand was generated with a peak friction angle of 40° and no cohesion (invented
        # parameters, testing.demo.synthetic); each stage's secant angle must come back near it.
        assert result.failure_secant_phi_deg == pytest.approx(40.0, abs=1.5)
        assert result.max_dilation_angle_deg is not None and result.max_dilation_angle_deg > 3.0
    envelope = selectors.latest_envelopes(test=sand)["peak"]
    assert envelope.n == 3
    assert envelope.friction_angle_deg == pytest.approx(40.0, abs=2.0)
    assert abs(envelope.cohesion_kpa) < 8.0
    assert [p["stage_number"] for p in envelope.points] == [1, 2, 3]
    assert envelope.normal_stress_min_kpa < envelope.normal_stress_max_kpa
    assert any(w["code"] for w in envelope.warnings)  # n = 3 always carries its warning


def test_clay_plateau_gives_its_own_envelope(demo: dict[str, Any]) -> None:
    _recompute(demo, demo["clay"])
    envelope = selectors.latest_envelopes(test=demo["clay"])["peak"]
    # Generated with φ′ = 24°, c′ = 5 kPa (invented demo parameters).
    assert envelope.friction_angle_deg == pytest.approx(24.0, abs=2.0)
    assert envelope.cohesion_kpa == pytest.approx(5.0, abs=5.0)


def test_same_inputs_and_version_reuse_the_result(demo: dict[str, Any]) -> None:
    sand = demo["sand"]
    _recompute(demo, sand, "first")
    rows_before = StageResult.objects.count(), EnvelopeResult.objects.count()
    second = _recompute(demo, sand, "second")
    assert (StageResult.objects.count(), EnvelopeResult.objects.count()) == rows_before
    for run in second:
        run.refresh_from_db()
        assert run.state == RunState.SUCCEEDED
        assert run.reused_from is not None
        assert computation.stage_result_for_run(run) == selectors.latest_stage_result(
            stage=run.stage
        )


def test_changed_readings_make_a_new_result_and_keep_the_old(demo: dict[str, Any]) -> None:
    sand = demo["sand"]
    _recompute(demo, sand)
    stage = sand.stages.get(stage_number=1)
    old = selectors.latest_stage_result(stage=stage)
    assert old is not None
    old_values = (old.pk, old.failure_shear_stress_kpa, old.inputs_hash)
    for block in ShearReadingBlock.objects.filter(stage=stage):  # a flat, different curve
        force = np.frombuffer(block.force_reading, dtype="<f8").copy()
        force[:] = 1.1 * 100
        ShearReadingBlock.objects.filter(pk=block.pk).update(
            force_reading=force.astype("<f8").tobytes()
        )
    with demo["capture"](execute=True):
        computation.stage_reduction_request(
            stage=stage, user=demo["technician"], reason="readings edited"
        )
    new = selectors.latest_stage_result(stage=stage)
    assert new is not None and new.pk != old.pk and new.inputs_hash != old.inputs_hash
    old.refresh_from_db()
    assert (old.pk, old.failure_shear_stress_kpa, old.inputs_hash) == old_values


def test_a_rolled_back_request_publishes_nothing(demo: dict[str, Any]) -> None:
    stage = demo["sand"].stages.first()

    def request_then_cancel() -> None:
        with transaction.atomic():
            computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="x")
            raise RuntimeError("user pressed cancel")

    with demo["capture"](execute=True) as callbacks, pytest.raises(RuntimeError):
        request_then_cancel()
    assert callbacks == []
    assert not ComputationRun.objects.filter(stage=stage).exists()
    assert not OutboxMessage.objects.filter(run__stage=stage).exists()


def test_requests_for_the_same_subject_share_one_queued_run(demo: dict[str, Any]) -> None:
    stage = demo["sand"].stages.first()
    with mock.patch.object(computation, "outbox_publish"):
        first = computation.stage_reduction_request(
            stage=stage, user=demo["technician"], reason="a"
        )
        second = computation.stage_reduction_request(
            stage=stage, user=demo["technician"], reason="b"
        )
    assert first.pk == second.pk
    assert OutboxMessage.objects.filter(run=first).count() == 1


def test_a_second_delivery_finds_nothing_to_claim(demo: dict[str, Any]) -> None:
    stage = demo["sand"].stages.first()
    with mock.patch.object(computation, "outbox_publish"):
        run = computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="a")
    assert computation.run_execute(run_id=run.pk) == "done"
    assert computation.run_execute(run_id=run.pk) == "skipped"
    assert StageResult.objects.filter(run=run).count() == 1
    run.refresh_from_db()
    assert run.attempts == 1


def test_a_run_without_readings_fails_with_a_message_a_person_can_act_on(
    demo: dict[str, Any],
) -> None:
    stage = demo["sand"].stages.first()
    ShearReadingBlock.objects.filter(stage=stage).delete()
    with demo["capture"](execute=True):
        run = computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="a")
    run.refresh_from_db()
    assert run.state == RunState.FAILED
    assert "at least 2 are needed" in run.error and f"Stage {stage.stage_number}" in run.error


def test_transient_database_error_puts_the_run_back_in_the_queue(demo: dict[str, Any]) -> None:
    stage = demo["sand"].stages.first()
    with mock.patch.object(computation, "outbox_publish"):
        run = computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="a")
    with (
        mock.patch(
            "testing.services.stage_inputs.stage_inputs_load",
            side_effect=OperationalError("server closed"),
        ),
        pytest.raises(computation.TransientError),
    ):
        computation.run_execute(run_id=run.pk)
    run.refresh_from_db()
    assert (run.state, run.attempts) == (RunState.QUEUED, 1)
    assert computation.run_execute(run_id=run.pk) == "done"


def test_sweeper_requeues_a_dead_workers_run_then_gives_up_after_three(
    demo: dict[str, Any],
) -> None:
    stage = demo["sand"].stages.first()
    with mock.patch.object(computation, "outbox_publish"):
        run = computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="a")
    past = timezone.now() - timedelta(seconds=1)
    for attempt in (1, 2):
        ComputationRun.objects.filter(pk=run.pk).update(
            state=RunState.RUNNING, attempts=attempt, lease_expires_at=past
        )
        assert computation.runs_sweep()["requeued"] == 1
        run.refresh_from_db()
        assert run.state == RunState.QUEUED
    ComputationRun.objects.filter(pk=run.pk).update(
        state=RunState.RUNNING, attempts=3, lease_expires_at=past
    )
    assert computation.runs_sweep()["failed"] == 1
    run.refresh_from_db()
    assert run.state == RunState.FAILED and "stopped 3 times" in run.error
    assert OutboxMessage.objects.filter(run=run).count() == 3  # the original and two re-queues


def test_live_lease_is_not_stolen(demo: dict[str, Any]) -> None:
    stage = demo["sand"].stages.first()
    with mock.patch.object(computation, "outbox_publish"):
        run = computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="a")
    ComputationRun.objects.filter(pk=run.pk).update(
        state=RunState.RUNNING,
        attempts=1,
        claim_token="someone",
        lease_expires_at=timezone.now() + timedelta(minutes=5),
    )
    assert computation.run_execute(run_id=run.pk) == "busy"
    assert computation.runs_sweep() == {"failed": 0, "requeued": 0, "republished": 0}


def test_broker_down_keeps_the_outbox_row_and_answers_fast(
    demo: dict[str, Any], settings: Any
) -> None:
    settings.CELERY_TASK_ALWAYS_EAGER = False
    stage = demo["sand"].stages.first()
    computation._broker_down_until = 0.0
    with (
        mock.patch(
            "testing.tasks.run_computation.apply_async",
            side_effect=ConnectionError("Connection refused"),
        ),
        demo["capture"](execute=True),
    ):
        run = computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="a")
    message = OutboxMessage.objects.get(run=run)
    assert message.published_at is None
    assert "Connection refused" in message.last_error
    computation._broker_down_until = 0.0
    with mock.patch("testing.tasks.run_computation.apply_async") as publish:
        assert computation.outbox_publish(message_ids=[message.pk]) == 1
    publish.assert_called_once()
    assert publish.call_args.kwargs["args"] == [run.pk]


def test_exclusion_needs_a_reason_and_refits_without_the_stage(demo: dict[str, Any]) -> None:
    sand = demo["sand"]
    _recompute(demo, sand)
    stage = sand.stages.get(stage_number=2)
    with pytest.raises(ServiceError, match="reason"):
        computation.stage_exclude(
            stage=stage, envelope_type="peak", reason="  ", user=demo["checker"]
        )
    with demo["capture"](execute=True):
        computation.stage_exclude(
            stage=stage,
            envelope_type="peak",
            reason="Specimen tilted at set-up",
            user=demo["checker"],
        )
    envelope = selectors.latest_envelopes(test=sand)["peak"]
    assert envelope.n == 2
    excluded = [p for p in envelope.points if not p["included"]]
    assert [(p["stage_number"], p["reason"]) for p in excluded] == [
        (2, "Specimen tilted at set-up")
    ]
    assert (
        EnvelopeResult.objects.filter(test=sand, envelope_type="peak").count() == 2
    )  # the earlier fit is kept


def test_recompute_command_leaves_existing_result_rows_untouched(demo: dict[str, Any]) -> None:
    _recompute(demo, demo["sand"])
    before = {
        r.pk: (r.failure_shear_stress_kpa, r.inputs_hash, r.analysis_version)
        for r in StageResult.objects.all()
    }
    with demo["capture"](execute=True):
        call_command("recompute_results", "--test", "DS-01", stdout=StringIO())
    after = {
        r.pk: (r.failure_shear_stress_kpa, r.inputs_hash, r.analysis_version)
        for r in StageResult.objects.filter(pk__in=before)
    }
    assert after == before
    assert all(math.isfinite(v[0]) for v in after.values())


def test_stage_result_carries_consolidation_rate_check_and_phase_relations(
    demo: dict[str, Any],
) -> None:
    clay = demo["clay"]
    _recompute(demo, clay)
    stage = clay.stages.get(stage_number=2)
    result = selectors.latest_stage_result(stage=stage)
    assert result is not None
    details = result.phase
    # The demo clay's consolidation readings follow Terzaghi's theory with t50 = 12 min (invented
    # demo value); Taylor's root-time construction should find it within 25 %.
    assert details["consolidation"]["taylor"]["t50_min"] == pytest.approx(12.0, rel=0.25)
    # ISO 17892-10 profile ships without a verified rate rule: the stage says so in plain words.
    assert any(f["code"] == "RATE_LIMIT_NOT_SET" for f in result.flags)
    # Phase relations from the specimen's masses: w = (M − Ms)/Ms (textbook definition).
    specimen = stage.specimen
    expected_w = (specimen.initial_mass_g - specimen.dry_mass_g) / specimen.dry_mass_g * 100.0
    assert details["initial"]["water_content_pct"] == pytest.approx(expected_w, rel=1e-9)
    assert details["initial"]["particle_density"] == "2.70"  # measured: no '#'
    assert details["consolidated"]["void_ratio"] < details["initial"]["void_ratio"]


def test_bs_profile_computes_the_permitted_rate_from_t100(demo: dict[str, Any]) -> None:
    sand = demo["sand"]
    _recompute(demo, sand)
    result = selectors.latest_stage_result(stage=sand.stages.get(stage_number=1))
    assert result is not None
    limit = result.phase["rate_limit"]
    # BS 1377-7 (from memory): t_f = 12.7 × t100, v_max = d_f / t_f.
    assert limit["basis"] == "t100"
    assert limit["max_rate_mm_per_min"] == pytest.approx(
        limit["displacement_at_failure_mm"] / (12.7 * limit["basis_time_min"]), rel=1e-12
    )
    assert result.max_rate_mm_per_min == pytest.approx(limit["max_rate_mm_per_min"])
    too_fast = any(f["code"] == "RATE_TOO_FAST" for f in result.flags)
    assert too_fast == (result.measured_rate_mm_per_min > result.max_rate_mm_per_min)


def test_a_fourth_delivery_does_not_run_and_records_why(demo: dict[str, Any]) -> None:
    stage = demo["sand"].stages.first()
    with mock.patch.object(computation, "outbox_publish"):
        run = computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="a")
    past = timezone.now() - timedelta(seconds=1)
    ComputationRun.objects.filter(pk=run.pk).update(
        state=RunState.RUNNING, attempts=3, lease_expires_at=past
    )
    assert computation.run_execute(run_id=run.pk) == "failed"
    run.refresh_from_db()
    assert (run.state, run.attempts) == (RunState.FAILED, 3)
    assert "stopped 3 times" in run.error
    assert not StageResult.objects.filter(run=run).exists()


def test_publishing_resumes_after_the_backoff_once_the_broker_answers(
    demo: dict[str, Any], settings: Any
) -> None:
    settings.CELERY_TASK_ALWAYS_EAGER = False
    stage = demo["sand"].stages.first()
    computation._broker_down_until = 0.0
    clock = [1000.0]
    with (
        mock.patch.object(computation.time, "monotonic", side_effect=lambda: clock[0]),
        mock.patch.object(computation, "broker_reachable", return_value=False),
        demo["capture"](execute=True),
    ):
        run = computation.stage_reduction_request(stage=stage, user=demo["technician"], reason="a")
        for _ in range(30):  # the relay keeps calling while the broker is down
            clock[0] += 1.0
            assert computation.outbox_publish() == 0
    # The broker is back: the relay keeps calling every second and must publish within one backoff.
    published_after = None
    with (
        mock.patch.object(computation.time, "monotonic", side_effect=lambda: clock[0]),
        mock.patch.object(computation, "broker_reachable", return_value=True),
        mock.patch("testing.tasks.run_computation.apply_async") as publish,
    ):
        for second in range(1, 30):
            clock[0] += 1.0
            if computation.outbox_publish(
                message_ids=[m.pk for m in OutboxMessage.objects.filter(run=run)]
            ):
                published_after = second
                break
    assert published_after is not None and published_after <= computation._BROKER_BACKOFF_S
    publish.assert_called_once()


def test_expired_calibration_is_flagged_on_the_stage_result(demo: dict[str, Any]) -> None:
    """The demo's DS-03 load cell was calibrated with a due date before the test date (invented
    scenario); its stage results must say so, as an error that blocks approval."""
    ds03 = DirectShearTest.objects.get(reference="DS-03")
    _recompute(demo, ds03)
    for result in selectors.latest_stage_results(test=ds03).values():
        codes = {f["code"]: f["severity"] for f in result.flags}
        assert codes.get("CALIBRATION_EXPIRED") == "error", result.flags
