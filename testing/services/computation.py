"""When and how background computations run: requests, the outbox, claiming, and the sweeper.

The road of one run:

1. A change (readings stored, a stage excluded, a recompute asked for) calls a ``*_request``
   service inside its transaction. That writes a queued :class:`ComputationRun` and an
   :class:`OutboxMessage` in the same transaction, and asks for the outbox to be published when the
   transaction commits. A rollback therefore publishes nothing.
2. Publishing hands the run id to Celery. With no broker configured the task runs right there, in
   process, through the same code. If the broker is down, the outbox row stays unpublished and the
   sweeper sends it later; the request does not wait on the broker.
3. The task claims the run with a conditional update (queued → running, with a short lease and a
   claim token) and counts the delivery. A second delivery of the same run finds nothing to claim.
4. The result rows and the "succeeded" state are written in one transaction that first re-checks
   the claim token, so a run can never store its results twice.
5. The sweeper (run by every worker every few seconds, and by ``manage.py relay_outbox``) publishes
   what is left in the outbox, re-queues runs whose worker died (lease expired), and fails a run
   after :data:`MAX_DELIVERIES` deliveries with the reason.
"""

from __future__ import annotations

import logging
import socket
import time
import uuid
from datetime import timedelta
from typing import Any
from urllib.parse import urlsplit

from django.conf import settings
from django.contrib.auth.models import User
from django.db import IntegrityError, transaction
from django.db.models import F, Q
from django.utils import timezone

from testing import access, analysis
from testing.models import (
    ComputationRun,
    DirectShearTest,
    EnvelopeType,
    OutboxMessage,
    RunKind,
    RunState,
    ShearStage,
    StageExclusion,
    StageResult,
)
from testing.models.audit import acting
from testing.services.errors import NotAllowed, ServiceError

logger = logging.getLogger(__name__)

MAX_DELIVERIES = 3

# After a failed publish, skip further attempts for a short while so that requests made while the
# broker is down do not each wait for a connection timeout.
_BROKER_BACKOFF_S = 10.0
_broker_down_until = 0.0


def _lease() -> timedelta:
    return timedelta(seconds=settings.TAULINE_RUN_LEASE_SECONDS)


# --- Requests ------------------------------------------------------------------------------------


def _request(
    *,
    kind: RunKind,
    subject_key: str,
    reason: str,
    user: User | None,
    test: DirectShearTest | None = None,
    stage: ShearStage | None = None,
    envelope_type: str = "",
) -> ComputationRun:
    """A queued run for the subject: the one already queued (it will read the latest data), or a new one."""
    with transaction.atomic():
        existing = ComputationRun.objects.filter(
            kind=kind, subject_key=subject_key, state=RunState.QUEUED
        ).first()
        if existing is not None:
            return existing
        try:
            with transaction.atomic():
                run = ComputationRun.objects.create(
                    kind=kind,
                    subject_key=subject_key,
                    reason=reason[:200],
                    requested_by=user,
                    test=test,
                    stage=stage,
                    envelope_type=envelope_type,
                )
        except IntegrityError:  # another request queued the same subject a moment ago
            return ComputationRun.objects.get(
                kind=kind, subject_key=subject_key, state=RunState.QUEUED
            )
        message = OutboxMessage.objects.create(run=run)
        transaction.on_commit(lambda: outbox_publish(message_ids=[message.pk]))
    return run


def stage_reduction_request(*, stage: ShearStage, user: User | None, reason: str) -> ComputationRun:
    """Queue a reduction of one stage (and, when it succeeds, the envelopes of its test set)."""
    return _request(
        kind=RunKind.STAGE_REDUCTION,
        subject_key=f"stage:{stage.pk}",
        reason=reason,
        user=user,
        test=stage.test,
        stage=stage,
    )


def envelope_fit_request(
    *, test: DirectShearTest, envelope_type: str, user: User | None, reason: str
) -> ComputationRun:
    """Queue a fit of one envelope type for a test set, from its stages' latest results."""
    envelope_type = EnvelopeType(envelope_type)
    return _request(
        kind=RunKind.ENVELOPE_FIT,
        subject_key=f"test:{test.pk}:{envelope_type}",
        reason=reason,
        user=user,
        test=test,
        envelope_type=envelope_type,
    )


def test_recompute_request(
    *, test: DirectShearTest, user: User | None, reason: str
) -> list[ComputationRun]:
    """Queue every stage of a test set; envelopes follow each stage. Issued results are never touched:
    results are only ever added, and issued report revisions point at the rows they froze."""
    if user is not None and not access.is_lab_staff(user):
        raise NotAllowed("Only lab staff can ask for results to be recomputed.")
    return [
        stage_reduction_request(stage=stage, user=user, reason=reason)
        for stage in test.stages.all()
    ]


def stage_exclude(
    *, stage: ShearStage, envelope_type: str, reason: str, user: User
) -> StageExclusion:
    """Leave a stage out of one envelope type (a reason is required) and refit that envelope."""
    if not access.can_enter_readings(user) and not access.can_check(user):
        raise NotAllowed("Only technicians, checkers and the lab manager can exclude a stage.")
    reason = reason.strip()
    if not reason:
        raise ServiceError("Give the reason for leaving this stage out of the envelope.")
    if stage.test.released_at is not None:
        raise ServiceError("This test set has been reported; its stage selection cannot change.")
    with transaction.atomic(), acting(user, reason):
        exclusion, _ = StageExclusion.objects.update_or_create(
            stage=stage,
            envelope_type=EnvelopeType(envelope_type),
            defaults={"reason": reason, "excluded_by": user},
        )
        envelope_fit_request(
            test=stage.test,
            envelope_type=envelope_type,
            user=user,
            reason=f"stage {stage.stage_number} excluded: {reason}",
        )
    return exclusion


def stage_include(*, stage: ShearStage, envelope_type: str, user: User) -> None:
    """Put an excluded stage back into an envelope type and refit it."""
    if not access.can_enter_readings(user) and not access.can_check(user):
        raise NotAllowed("Only technicians, checkers and the lab manager can include a stage.")
    if stage.test.released_at is not None:
        raise ServiceError("This test set has been reported; its stage selection cannot change.")
    with transaction.atomic(), acting(user, "included again"):
        deleted, _ = StageExclusion.objects.filter(
            stage=stage, envelope_type=envelope_type
        ).delete()
        if deleted:
            envelope_fit_request(
                test=stage.test,
                envelope_type=envelope_type,
                user=user,
                reason=f"stage {stage.stage_number} included again",
            )


# --- Publishing and the sweeper ----------------------------------------------------------------


def broker_reachable(timeout_s: float = 0.5) -> bool:
    """A TCP connect to the broker, bounded in time. The client library's own reconnect loop can
    take seconds when the broker is down, which a web request must not wait for."""
    url = urlsplit(settings.REDIS_URL)
    try:
        with socket.create_connection(
            (url.hostname or "127.0.0.1", url.port or 6379), timeout=timeout_s
        ):
            return True
    except OSError:
        return False


def outbox_publish(*, message_ids: list[int] | None = None, limit: int = 200) -> int:
    """Hand unpublished outbox messages to the broker (in-process when none is configured).

    Returns how many were published. Broker errors are recorded on the message, never raised.
    """
    global _broker_down_until
    from testing.tasks import run_computation  # tasks import services; import late to avoid a cycle

    eager = settings.CELERY_TASK_ALWAYS_EAGER
    if not eager:
        if time.monotonic() < _broker_down_until:
            return 0
        if not broker_reachable():
            _broker_down_until = time.monotonic() + _BROKER_BACKOFF_S
            return 0
    pending = OutboxMessage.objects.filter(published_at__isnull=True).order_by("id")
    if message_ids is not None:
        pending = pending.filter(id__in=message_ids)
    batch = list(pending.values_list("id", "run_id")[:limit])
    if not batch:
        return 0
    published = 0
    # A connection of this call's own: the worker's shared producer pool belongs to its event loop
    # and must not be used from the heartbeat thread.
    with run_computation.app.connection_for_write() as connection:
        for message_id, run_id in batch:
            try:
                run_computation.apply_async(
                    args=[run_id], queue="computation", connection=connection
                )
            except Exception as exc:  # kombu/redis connection errors: keep the row, try again later
                _broker_down_until = time.monotonic() + _BROKER_BACKOFF_S
                OutboxMessage.objects.filter(pk=message_id).update(
                    publish_attempts=F("publish_attempts") + 1,
                    last_error=f"{type(exc).__name__}: {exc}"[:500],
                )
                logger.warning("Broker unavailable; run %s stays in the outbox: %s", run_id, exc)
                break
            OutboxMessage.objects.filter(pk=message_id, published_at__isnull=True).update(
                published_at=timezone.now(), publish_attempts=F("publish_attempts") + 1
            )
            published += 1
    return published


def runs_sweep(*, now: Any = None) -> dict[str, int]:
    """Recover runs whose worker died or whose message was lost; give up after MAX_DELIVERIES.

    Safe to run from several workers at once: every change is a conditional update.
    """
    now = now or timezone.now()
    counts = {"failed": 0, "requeued": 0, "republished": 0}
    expired = ComputationRun.objects.filter(state=RunState.RUNNING, lease_expires_at__lt=now)
    for run in expired.only("id", "attempts", "kind", "subject_key"):
        if run.attempts >= MAX_DELIVERIES:
            counts["failed"] += ComputationRun.objects.filter(
                pk=run.pk, state=RunState.RUNNING, lease_expires_at__lt=now
            ).update(
                state=RunState.FAILED,
                finished_at=now,
                claim_token="",
                error=f"The worker stopped {run.attempts} times while running this; it will not be tried again. "
                "Check the worker logs, then ask for the computation again.",
            )
            continue
        try:
            with transaction.atomic():
                changed = ComputationRun.objects.filter(
                    pk=run.pk, state=RunState.RUNNING, lease_expires_at__lt=now
                ).update(state=RunState.QUEUED, claim_token="", lease_expires_at=None)
                if changed:
                    OutboxMessage.objects.create(run_id=run.pk)
                    counts["requeued"] += 1
        except (
            IntegrityError
        ):  # a newer run for the same subject is already queued and will cover it
            ComputationRun.objects.filter(pk=run.pk, state=RunState.RUNNING).update(
                state=RunState.FAILED,
                finished_at=now,
                claim_token="",
                error="Interrupted; a newer queued run for the same record replaces it.",
            )
            counts["failed"] += 1
    # Queued runs whose message was published long ago but never claimed (e.g. prefetched by a worker
    # that died): publish again. A duplicate message is harmless: only one delivery can claim the run.
    stale_before = now - timedelta(seconds=settings.TAULINE_RUN_REPUBLISH_SECONDS)
    stale = (
        ComputationRun.objects.filter(state=RunState.QUEUED, requested_at__lt=stale_before)
        .exclude(outbox__published_at__isnull=True)
        .exclude(outbox__published_at__gte=stale_before)
    )
    for run_id in stale.values_list("id", flat=True).distinct()[:200]:
        OutboxMessage.objects.create(run_id=run_id)
        counts["republished"] += 1
    return counts


def relay_once() -> dict[str, int]:
    """One pass of the relay: sweep, publish the outbox, then let other apps (reports) hand their
    stalled work to the broker again (``testing.signals.relay_pass``)."""
    from testing.signals import relay_pass

    counts = runs_sweep()
    counts["published"] = outbox_publish()
    for receiver, answer in relay_pass.send_robust(sender=None):
        if isinstance(answer, Exception):
            logger.error("relay receiver %r failed: %s", receiver, answer, exc_info=answer)
        elif answer:
            counts.update(answer)
    return counts


# --- Executing a run -----------------------------------------------------------------------------


class TransientError(Exception):
    """A database hiccup worth retrying with backoff."""


def run_execute(*, run_id: int) -> str:
    """Claim and carry out one run. Returns what happened: claimed-and-done, skipped, failed, busy.

    Raises :class:`TransientError` on a database error worth retrying; the run is then back in the
    queue for the retry to claim.
    """
    from django.db import InterfaceError, OperationalError

    token = uuid.uuid4().hex
    now = timezone.now()
    claimable = Q(state=RunState.QUEUED) | Q(state=RunState.RUNNING, lease_expires_at__lt=now)
    claimed = ComputationRun.objects.filter(
        claimable, pk=run_id, attempts__lt=MAX_DELIVERIES
    ).update(
        state=RunState.RUNNING,
        attempts=F("attempts") + 1,
        claim_token=token,
        lease_expires_at=now + _lease(),
        started_at=now,
        progress_pct=0,
        analysis_version=analysis.ANALYSIS_VERSION,
    )
    if not claimed:
        # Out of deliveries: the previous ones all died mid-run. Record why, once.
        gave_up = ComputationRun.objects.filter(
            claimable, pk=run_id, attempts__gte=MAX_DELIVERIES
        ).update(
            state=RunState.FAILED,
            finished_at=now,
            claim_token="",
            error=f"The worker stopped {MAX_DELIVERIES} times while running this; it will not be tried again. "
            "Check the worker logs, then ask for the computation again.",
        )
        if gave_up:
            return "failed"
        state = ComputationRun.objects.filter(pk=run_id).values_list("state", flat=True).first()
        return "busy" if state == RunState.RUNNING else "skipped"
    run = ComputationRun.objects.select_related("stage__test", "stage__specimen", "test").get(
        pk=run_id
    )
    try:
        if run.kind == RunKind.STAGE_REDUCTION:
            _execute_stage(run, token)
        elif run.kind == RunKind.ENVELOPE_FIT:
            _execute_envelope(run, token)
        else:
            raise ServiceError(f"Runs of kind {run.kind!r} are carried out by the reports app.")
    except (analysis.AnalysisError, ServiceError) as exc:
        _finish_failed(run, token, str(exc))
        return "failed"
    except (OperationalError, InterfaceError) as exc:
        ComputationRun.objects.filter(pk=run.pk, claim_token=token).update(
            state=RunState.QUEUED, claim_token="", lease_expires_at=None, error=""
        )
        raise TransientError(str(exc)) from exc
    except Exception as exc:  # an unexpected error is recorded for a person to see, not retried
        logger.exception("Run %s failed", run.pk)
        _finish_failed(run, token, f"Unexpected error ({type(exc).__name__}): {exc}")
        return "failed"
    return "done"


def _progress(run: ComputationRun, token: str, pct: int) -> None:
    ComputationRun.objects.filter(pk=run.pk, claim_token=token).update(
        progress_pct=pct, lease_expires_at=timezone.now() + _lease()
    )


def _finish_failed(run: ComputationRun, token: str, error: str) -> None:
    ComputationRun.objects.filter(pk=run.pk, claim_token=token, state=RunState.RUNNING).update(
        state=RunState.FAILED,
        error=error or "Failed without a message.",
        finished_at=timezone.now(),
        claim_token="",
    )


def _lock_claim(run: ComputationRun, token: str) -> bool:
    """Inside a transaction: lock the run and confirm this delivery still holds the claim."""
    return (
        ComputationRun.objects.select_for_update()
        .filter(pk=run.pk, claim_token=token, state=RunState.RUNNING)
        .exists()
    )


def _reusable(run: ComputationRun, inputs_hash: str) -> ComputationRun | None:
    return (
        ComputationRun.objects.filter(
            kind=run.kind,
            subject_key=run.subject_key,
            inputs_hash=inputs_hash,
            analysis_version=analysis.ANALYSIS_VERSION,
            state=RunState.SUCCEEDED,
            reused_from__isnull=True,
        )
        .exclude(pk=run.pk)
        .order_by("-id")
        .first()
    )


def _succeed(
    run: ComputationRun, token: str, inputs_hash: str, reused_from: ComputationRun | None
) -> None:
    ComputationRun.objects.filter(pk=run.pk, claim_token=token).update(
        state=RunState.SUCCEEDED,
        inputs_hash=inputs_hash,
        reused_from=reused_from,
        progress_pct=100,
        finished_at=timezone.now(),
        claim_token="",
        error="",
    )


def _execute_stage(run: ComputationRun, token: str) -> None:
    from testing.services.direct_shear import stage_reduction_compute, stage_result_store
    from testing.services.stage_context import stage_context_build
    from testing.services.stage_inputs import stage_inputs_load

    stage = run.stage
    assert stage is not None
    inputs = stage_inputs_load(stage)
    inputs_hash = inputs.digest()
    _progress(run, token, 20)
    reused = _reusable(run, inputs_hash)
    # A reused result needs neither the context (consolidation fits, phase relations) nor the core.
    context = None if reused else stage_context_build(stage, inputs)
    reduction = None if context is None else stage_reduction_compute(stage, inputs, context)
    _progress(run, token, 80)
    with transaction.atomic():
        if not _lock_claim(run, token):
            return  # another delivery took over after our lease ran out; it will store the result
        if reduction is not None and context is not None:
            stage_result_store(
                run=run,
                stage=stage,
                inputs_hash=inputs_hash,
                reduction=reduction,
                inputs=inputs,
                context=context,
            )
        _succeed(run, token, inputs_hash, reused)
        if reused is None:
            _request_envelopes(stage.test, run.requested_by, f"stage {stage.stage_number} reduced")


def _request_envelopes(test: DirectShearTest, user: User | None, reason: str) -> None:
    """Queue each envelope type that has at least two stages with a value for it."""
    from testing.selectors import latest_stage_results

    results = latest_stage_results(test=test).values()
    wanted = [
        (EnvelopeType.PEAK, "failure_shear_stress_kpa"),
        (EnvelopeType.ULTIMATE, "ultimate_shear_stress_kpa"),
        (EnvelopeType.RESIDUAL, "residual_shear_stress_kpa"),
    ]
    for envelope_type, field in wanted:
        if sum(getattr(r, field) is not None for r in results) >= 2:
            envelope_fit_request(test=test, envelope_type=envelope_type, user=user, reason=reason)


def _execute_envelope(run: ComputationRun, token: str) -> None:
    from testing.selectors import latest_stage_results
    from testing.services.direct_shear import (
        envelope_fit_compute,
        envelope_inputs_load,
        envelope_result_store,
        envelope_set_flags,
    )

    test = run.test
    assert test is not None
    latest = latest_stage_results(test=test)
    inputs = envelope_inputs_load(test, run.envelope_type, latest)
    inputs_hash = inputs.digest()
    reused = _reusable(run, inputs_hash)
    fit = None if reused else envelope_fit_compute(inputs)
    set_flags = [] if reused else envelope_set_flags(test, inputs, latest)
    _progress(run, token, 80)
    with transaction.atomic():
        if not _lock_claim(run, token):
            return
        if fit is not None:
            envelope_result_store(
                run=run,
                test=test,
                inputs=inputs,
                inputs_hash=inputs_hash,
                fit=fit,
                set_flags=set_flags,
            )
        _succeed(run, token, inputs_hash, reused)


def stage_result_for_run(run: ComputationRun) -> StageResult | None:
    """The result row that stands for a run: its own, or the one of the run it reused."""
    source = run.reused_from or run
    return StageResult.objects.filter(run=source).first()
