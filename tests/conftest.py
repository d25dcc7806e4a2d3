"""The fixed cast every test uses, and a small record tree for two client organisations.

Personas: ``technician``, ``checker``, ``approver``, ``manager`` (lab staff), ``client_a`` (a user of
client A), ``client_b`` (a user of client B) and ``deactivated`` (a former technician).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from datetime import date
from decimal import Decimal
from typing import Any

import pytest
from django.contrib.auth.models import User

from testing.models import Borehole, Organisation, Project, Role, Sample, SampleType
from testing.services.accounts import lab_user_create
from testing.services.records import sample_receive

PASSWORD = "correct-horse-battery-staple"


@dataclass(frozen=True)
class Cast:
    technician: User
    checker: User
    approver: User
    manager: User
    client_a: User
    client_b: User
    deactivated: User
    org_a: Organisation
    org_b: Organisation


@dataclass(frozen=True)
class Records:
    project: Project
    borehole: Borehole
    sample: Sample


@pytest.fixture(autouse=True)
def _tasks_in_process(settings: Any) -> Iterator[None]:
    """Background tasks run in the test process, even when CI sets REDIS_URL for the whole run.

    Tests of the real broker and workers (marked ``worker``) start their own processes instead.
    """
    from labsite.celery import app

    settings.CELERY_TASK_ALWAYS_EAGER = True
    previous = app.conf.task_always_eager
    app.conf.task_always_eager = True
    yield
    app.conf.task_always_eager = previous


@pytest.fixture(autouse=True)
def _fast_password_hashing(settings: Any) -> None:
    """Hashing at full strength costs ~0.3 s a user; the suite tests roles, not the hasher."""
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@pytest.fixture
def cast(db: None) -> Cast:
    org_a = Organisation.objects.create(name="Client A Consulting", code="client-a")
    org_b = Organisation.objects.create(name="Client B Holdings", code="client-b")
    deactivated = lab_user_create(username="former", password=PASSWORD, roles=[Role.TECHNICIAN])
    deactivated.is_active = False
    deactivated.save(update_fields=["is_active"])
    return Cast(
        technician=lab_user_create(username="tech", password=PASSWORD, roles=[Role.TECHNICIAN]),
        checker=lab_user_create(username="checker", password=PASSWORD, roles=[Role.CHECKER]),
        approver=lab_user_create(username="approver", password=PASSWORD, roles=[Role.APPROVER]),
        manager=lab_user_create(username="manager", password=PASSWORD, roles=[Role.MANAGER]),
        client_a=lab_user_create(
            username="client-a", password=PASSWORD, roles=[Role.CLIENT], organisation=org_a
        ),
        client_b=lab_user_create(
            username="client-b", password=PASSWORD, roles=[Role.CLIENT], organisation=org_b
        ),
        deactivated=deactivated,
        org_a=org_a,
        org_b=org_b,
    )


def make_records(cast: Cast, organisation: Organisation, prefix: str) -> Records:
    project = Project.objects.create(
        organisation=organisation, reference=f"{prefix}-001", name=f"{prefix} site"
    )
    borehole = Borehole.objects.create(project=project, reference="BH01")
    sample = sample_receive(
        user=cast.technician,
        borehole=borehole,
        reference="U1",
        depth_top_m=Decimal("1.20"),
        depth_base_m=Decimal("1.65"),
        sample_type=SampleType.UNDISTURBED,
        received_on=date(2026, 11, 2),
    )
    return Records(project=project, borehole=borehole, sample=sample)


@pytest.fixture
def records_a(cast: Cast) -> Records:
    return make_records(cast, cast.org_a, "A")


@pytest.fixture
def records_b(cast: Cast) -> Records:
    return make_records(cast, cast.org_b, "B")
