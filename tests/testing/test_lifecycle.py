"""Sample lifecycle: allowed moves, refusals with reasons, and one event per move."""

from __future__ import annotations

import pytest

from testing.models import SampleEvent, SampleStatus
from testing.services.errors import InvalidTransition, NotAllowed
from testing.services.lifecycle import sample_transition
from tests.conftest import Cast, Records

HAPPY_PATH = [
    SampleStatus.SCHEDULED,
    SampleStatus.IN_TEST,
    SampleStatus.TESTED,
    SampleStatus.REPORTED,
    SampleStatus.DISPOSED,
]


def test_receipt_writes_the_first_event(records_a: Records, cast: Cast) -> None:
    event = SampleEvent.objects.get(sample=records_a.sample)
    assert (event.from_status, event.to_status, event.by) == (
        "",
        SampleStatus.RECEIVED,
        cast.technician,
    )


def test_full_lifecycle_records_who_when_from_to(records_a: Records, cast: Cast) -> None:
    sample = records_a.sample
    previous = SampleStatus.RECEIVED
    for target in HAPPY_PATH:
        note = "Skip after retention period." if target == SampleStatus.DISPOSED else ""
        event = sample_transition(sample=sample, to_status=target, user=cast.technician, note=note)
        assert (event.from_status, event.to_status, event.by, event.note) == (
            previous,
            target,
            cast.technician,
            note,
        )
        sample.refresh_from_db()
        assert sample.status == target
        assert sample.status_changed_at == event.at
        previous = target
    moves = list(SampleEvent.objects.filter(sample=sample).values_list("from_status", "to_status"))
    assert moves == [
        ("", "received"),
        *zip(["received", *HAPPY_PATH[:-1]], HAPPY_PATH, strict=True),
    ]


@pytest.mark.parametrize(
    ("start", "target"),
    [
        ([], SampleStatus.TESTED),  # received cannot jump to tested
        ([], SampleStatus.REPORTED),
        ([SampleStatus.SCHEDULED, SampleStatus.IN_TEST], SampleStatus.REPORTED),
        ([SampleStatus.ON_HOLD], SampleStatus.REPORTED),
    ],
)
def test_disallowed_moves_are_refused_with_the_allowed_list(
    records_a: Records, cast: Cast, start: list[SampleStatus], target: SampleStatus
) -> None:
    for step in start:
        sample_transition(
            sample=records_a.sample, to_status=step, user=cast.technician, note="waiting for client"
        )
    before = SampleEvent.objects.count()
    with pytest.raises(InvalidTransition, match="Allowed next"):
        sample_transition(sample=records_a.sample, to_status=target, user=cast.technician)
    assert SampleEvent.objects.count() == before


def test_disposed_is_final(records_a: Records, cast: Cast) -> None:
    sample_transition(
        sample=records_a.sample,
        to_status=SampleStatus.DISPOSED,
        user=cast.manager,
        note="Client withdrew.",
    )
    for target in SampleStatus:
        if target != SampleStatus.DISPOSED:
            with pytest.raises(InvalidTransition):
                sample_transition(
                    sample=records_a.sample, to_status=target, user=cast.manager, note="x"
                )


def test_hold_and_disposal_need_a_reason(records_a: Records, cast: Cast) -> None:
    for target in (SampleStatus.ON_HOLD, SampleStatus.DISPOSED):
        with pytest.raises(InvalidTransition, match="reason"):
            sample_transition(
                sample=records_a.sample, to_status=target, user=cast.technician, note="  "
            )
    sample_transition(
        sample=records_a.sample,
        to_status=SampleStatus.ON_HOLD,
        user=cast.technician,
        note="Awaiting schedule",
    )
    sample_transition(
        sample=records_a.sample, to_status=SampleStatus.SCHEDULED, user=cast.technician
    )
    assert records_a.sample.status == SampleStatus.SCHEDULED


@pytest.mark.parametrize("who", ["client_a", "client_b", "deactivated"])
def test_only_active_staff_move_samples(records_a: Records, cast: Cast, who: str) -> None:
    with pytest.raises(NotAllowed):
        sample_transition(
            sample=records_a.sample, to_status=SampleStatus.SCHEDULED, user=getattr(cast, who)
        )
    records_a.sample.refresh_from_db()
    assert records_a.sample.status == SampleStatus.RECEIVED


def test_stale_copy_cannot_replay_a_move(records_a: Records, cast: Cast) -> None:
    """Two people holding the same page: the second press is checked against the stored state."""
    from testing.models import Sample

    stale = Sample.objects.get(pk=records_a.sample.pk)
    sample_transition(
        sample=records_a.sample, to_status=SampleStatus.SCHEDULED, user=cast.technician
    )
    sample_transition(sample=records_a.sample, to_status=SampleStatus.IN_TEST, user=cast.technician)
    with pytest.raises(InvalidTransition, match="in test"):
        sample_transition(sample=stale, to_status=SampleStatus.SCHEDULED, user=cast.technician)
    assert SampleEvent.objects.filter(sample=records_a.sample).count() == 3
