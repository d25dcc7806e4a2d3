"""Celery tasks: ids in, one service call, safe to run twice."""

from __future__ import annotations

from celery import Task, shared_task

from testing.services import computation


@shared_task(
    bind=True,
    name="tauline.run_computation",
    # Runs report their state in the database; no result backend round trip, which would also
    # make publishing wait on a dead broker.
    ignore_result=True,
    acks_late=True,
    reject_on_worker_lost=True,
    max_retries=5,
)
def run_computation(self: Task, run_id: int) -> str:
    """Carry out one computation run. A duplicate delivery finds nothing to claim and returns."""
    try:
        outcome = computation.run_execute(run_id=run_id)
    except computation.TransientError as exc:
        # A database hiccup: the run is queued again; retry with exponential backoff.
        raise self.retry(exc=exc, countdown=min(60, 2 ** (self.request.retries + 1))) from exc
    if outcome == "busy":
        # Another delivery holds a live lease (e.g. redelivered while the first is still working);
        # look again once that lease could have run out.
        from django.conf import settings

        raise self.retry(countdown=settings.TAULINE_RUN_LEASE_SECONDS + 1)
    return outcome


@shared_task(name="tauline.relay_outbox", ignore_result=True)
def relay_outbox() -> dict[str, int]:
    """Publish the outbox and recover stalled runs (also run by each worker's heartbeat thread)."""
    return computation.relay_once()
