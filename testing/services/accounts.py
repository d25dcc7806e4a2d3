"""Creating lab users with their roles."""

from __future__ import annotations

from collections.abc import Iterable

from django.contrib.auth import get_user_model
from django.contrib.auth.models import User
from django.db import transaction

from testing.models import LabProfile, Organisation, Role
from testing.services.errors import ServiceError


@transaction.atomic
def lab_user_create(
    *,
    username: str,
    password: str,
    roles: Iterable[Role],
    organisation: Organisation | None = None,
    first_name: str = "",
    last_name: str = "",
    email: str = "",
    job_title: str = "",
) -> User:
    """Create a user and their lab profile. Client users need an organisation and no staff role."""
    role_set = set(roles)
    if Role.CLIENT in role_set:
        if role_set != {Role.CLIENT}:
            raise ServiceError("A client user cannot also hold a lab staff role.")
        if organisation is None:
            raise ServiceError("A client user must belong to an organisation.")
    elif organisation is not None:
        raise ServiceError("Only client users belong to a client organisation.")
    if not role_set:
        raise ServiceError("Give the user at least one role.")
    user_model = get_user_model()
    user = user_model.objects.create_user(
        username=username,
        password=password,
        first_name=first_name,
        last_name=last_name,
        email=email,
    )
    LabProfile.objects.create(
        user=user,
        is_technician=Role.TECHNICIAN in role_set,
        is_checker=Role.CHECKER in role_set,
        is_approver=Role.APPROVER in role_set,
        is_manager=Role.MANAGER in role_set,
        organisation=organisation,
        job_title=job_title,
    )
    return user
