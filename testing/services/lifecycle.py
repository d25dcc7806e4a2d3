"""Sample throughput: the lifecycle move and its append-only event, in one transaction."""

from __future__ import annotations

from datetime import datetime

from django.contrib.auth.models import User
from django.db import transaction
from django.utils import timezone

from testing import access
from testing.models import Sample, SampleEvent, SampleStatus
from testing.models.samples import SAMPLE_TRANSITIONS, TRANSITIONS_NEEDING_NOTE
from testing.services.errors import InvalidTransition, NotAllowed


def sample_transition(
    *,
    sample: Sample,
    to_status: SampleStatus | str,
    user: User,
    note: str = "",
    at: datetime | None = None,
) -> SampleEvent:
    """Move a sample to ``to_status`` and record the event (who, when, from, to, note).

    The row is locked while it moves, so two people pressing the button at once give one move and
    one clear refusal, never two events.
    """
    if not access.is_lab_staff(user):
        raise NotAllowed("Only lab staff can change a sample's status.")
    target = SampleStatus(to_status)
    note = note.strip()
    if target in TRANSITIONS_NEEDING_NOTE and not note:
        raise InvalidTransition(f"Give a reason when a sample is put {target.label.lower()}.")
    moment = at or timezone.now()
    with transaction.atomic():
        locked = Sample.objects.select_for_update().get(pk=sample.pk)
        current = SampleStatus(locked.status)
        if target not in SAMPLE_TRANSITIONS[current]:
            allowed = (
                ", ".join(SampleStatus(s).label for s in sorted(SAMPLE_TRANSITIONS[current]))
                or "none"
            )
            raise InvalidTransition(
                f"Sample {locked.reference} is {current.label.lower()}; it cannot move to "
                f"{target.label.lower()}. Allowed next: {allowed}."
            )
        locked.status = target
        locked.status_changed_at = moment
        # An update, not save(): the move is recorded by its SampleEvent, not as field history.
        Sample.objects.filter(pk=locked.pk).update(status=target, status_changed_at=moment)
        event = SampleEvent.objects.create(
            sample=locked, at=moment, by=user, from_status=current, to_status=target, note=note
        )
    sample.status = locked.status
    sample.status_changed_at = locked.status_changed_at
    return event
