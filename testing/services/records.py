"""Creating the record tree: organisation → project → borehole → sample → specimen."""

from __future__ import annotations

from datetime import date, datetime, timedelta
from decimal import Decimal
from typing import Any

from django.contrib.auth.models import User
from django.db import transaction
from django.utils import timezone

from testing import access
from testing.models import (
    Borehole,
    Organisation,
    Project,
    Sample,
    SampleEvent,
    SampleStatus,
    Specimen,
)
from testing.models.audit import acting
from testing.services.errors import NotAllowed


def _require_records_role(user: User) -> None:
    if not access.can_receive_samples(user):
        raise NotAllowed("Only technicians and the lab manager can create lab records.")


def organisation_create(*, user: User, name: str, code: str, **fields: Any) -> Organisation:
    if not access.can_manage(user):
        raise NotAllowed("Only the lab manager can register a client organisation.")
    organisation = Organisation(name=name, code=code, **fields)
    organisation.full_clean()
    with acting(user):
        organisation.save()
    return organisation


def project_create(
    *, user: User, organisation: Organisation, reference: str, name: str, **fields: Any
) -> Project:
    if not access.can_manage(user):
        raise NotAllowed("Only the lab manager can open a project.")
    project = Project(organisation=organisation, reference=reference, name=name, **fields)
    project.full_clean()
    with acting(user):
        project.save()
    return project


def borehole_create(*, user: User, project: Project, reference: str, **fields: Any) -> Borehole:
    _require_records_role(user)
    borehole = Borehole(project=project, reference=reference, **fields)
    borehole.full_clean()
    with acting(user):
        borehole.save()
    return borehole


def sample_receive(
    *,
    user: User,
    borehole: Borehole,
    reference: str,
    depth_top_m: Decimal,
    depth_base_m: Decimal,
    sample_type: str,
    received_on: date | None = None,
    due_on: date | None = None,
    at: datetime | None = None,
    **fields: Any,
) -> Sample:
    """Log a sample in as received; its first lifecycle event is written with it.

    ``due_on`` defaults to the receipt date plus the turnaround agreed on the borehole's project,
    or the lab's default turnaround when the project has no agreement.
    """
    _require_records_role(user)
    moment = at or timezone.now()
    received = received_on or timezone.localdate(moment)
    due = due_on or received + timedelta(days=borehole.project.turnaround_days)
    sample = Sample(
        borehole=borehole,
        reference=reference,
        depth_top_m=depth_top_m,
        depth_base_m=depth_base_m,
        sample_type=sample_type,
        received_on=received,
        received_by=user,
        due_on=due,
        status=SampleStatus.RECEIVED,
        status_changed_at=moment,
        **fields,
    )
    sample.full_clean()
    with transaction.atomic(), acting(user):
        sample.save()
        SampleEvent.objects.create(
            sample=sample,
            at=moment,
            by=user,
            from_status="",
            to_status=SampleStatus.RECEIVED,
            note="Logged in.",
        )
    return sample


def specimen_create(*, user: User, sample: Sample, reference: str, **fields: Any) -> Specimen:
    _require_records_role(user)
    specimen = Specimen(sample=sample, reference=reference, **fields)
    specimen.full_clean()
    with acting(user):
        specimen.save()
    return specimen
