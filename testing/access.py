"""Who may see or change what. Every page, endpoint and portal view goes through these functions.

Rules:
- Lab staff (any staff role, active account) see every record.
- A client user sees only their own organisation's projects, boreholes and samples, and a test set
  only once a signed report has released it. Everything else answers 404 — the same answer as
  for a record that does not exist, so existence does not leak.
- Inactive users and users without a lab profile see nothing.
"""

from __future__ import annotations

from typing import TypeVar

from django.contrib.auth.models import AnonymousUser, User
from django.core.exceptions import ObjectDoesNotExist
from django.db.models import Model, Q, QuerySet
from django.http import Http404

from testing.models import (
    Borehole,
    DirectShearTest,
    LabProfile,
    Project,
    Sample,
    ShearStage,
    Specimen,
)

AnyUser = User | AnonymousUser
M = TypeVar("M", bound=Model)

_NOTHING = Q(pk__in=[])


def profile_of(user: AnyUser) -> LabProfile | None:
    """The user's lab profile, or None for anonymous, inactive or profile-less users."""
    if not user.is_authenticated or not user.is_active:
        return None
    try:
        return user.lab_profile
    except LabProfile.DoesNotExist:
        return None


def is_lab_staff(user: AnyUser) -> bool:
    profile = profile_of(user)
    return profile is not None and profile.is_staff_member


def client_organisation_id(user: AnyUser) -> int | None:
    profile = profile_of(user)
    if profile is None or profile.is_staff_member:
        return None
    return profile.organisation_id


def can_enter_readings(user: AnyUser) -> bool:
    profile = profile_of(user)
    return profile is not None and (profile.is_technician or profile.is_manager)


def can_receive_samples(user: AnyUser) -> bool:
    return can_enter_readings(user)


def can_check(user: AnyUser) -> bool:
    profile = profile_of(user)
    return profile is not None and profile.is_checker


def can_approve(user: AnyUser) -> bool:
    profile = profile_of(user)
    return profile is not None and profile.is_approver


def can_manage(user: AnyUser) -> bool:
    profile = profile_of(user)
    return profile is not None and profile.is_manager


# --- Visibility filters: one per object type, relative to that type ---------------------------


def _organisation_filter(
    user: AnyUser, path: str, *, released_only: bool = False, released_path: str = ""
) -> Q:
    if is_lab_staff(user):
        return Q()
    org_id = client_organisation_id(user)
    if org_id is None:
        return _NOTHING
    condition = Q(**{path: org_id})
    if released_only:
        condition &= Q(**{f"{released_path}released_at__isnull": False})
    return condition


def project_filter(user: AnyUser) -> Q:
    return _organisation_filter(user, "organisation_id")


def borehole_filter(user: AnyUser) -> Q:
    return _organisation_filter(user, "project__organisation_id")


def sample_filter(user: AnyUser) -> Q:
    return _organisation_filter(user, "borehole__project__organisation_id")


def specimen_filter(user: AnyUser) -> Q:
    return _organisation_filter(user, "sample__borehole__project__organisation_id")


def test_filter(user: AnyUser) -> Q:
    return _organisation_filter(user, "project__organisation_id", released_only=True)


def stage_filter(user: AnyUser) -> Q:
    return _organisation_filter(
        user, "test__project__organisation_id", released_only=True, released_path="test__"
    )


def _get(queryset: QuerySet[M], condition: Q, object_id: object) -> M:
    try:
        return queryset.filter(condition).get(pk=object_id)
    except (ObjectDoesNotExist, ValueError, TypeError) as exc:
        raise Http404("No such record.") from exc


def project_get_for_user(*, user: AnyUser, project_id: object) -> Project:
    return _get(Project.objects.select_related("organisation"), project_filter(user), project_id)


def borehole_get_for_user(*, user: AnyUser, borehole_id: object) -> Borehole:
    return _get(Borehole.objects.select_related("project"), borehole_filter(user), borehole_id)


def sample_get_for_user(*, user: AnyUser, sample_id: object) -> Sample:
    return _get(Sample.objects.select_related("borehole__project"), sample_filter(user), sample_id)


def specimen_get_for_user(*, user: AnyUser, specimen_id: object) -> Specimen:
    return _get(
        Specimen.objects.select_related("sample__borehole__project"),
        specimen_filter(user),
        specimen_id,
    )


def test_get_for_user(*, user: AnyUser, test_id: object) -> DirectShearTest:
    return _get(
        DirectShearTest.objects.select_related("project__organisation"), test_filter(user), test_id
    )


def stage_get_for_user(*, user: AnyUser, stage_id: object) -> ShearStage:
    return _get(
        ShearStage.objects.select_related("test__project", "specimen"), stage_filter(user), stage_id
    )
