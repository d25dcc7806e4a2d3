"""Who a user is to the lab: staff roles, or a client organisation's member."""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q


class Role(models.TextChoices):
    TECHNICIAN = "technician", "Technician"
    CHECKER = "checker", "Checker"
    APPROVER = "approver", "Approving engineer"
    MANAGER = "manager", "Lab manager"
    CLIENT = "client", "Client user"


STAFF_ROLES = frozenset({Role.TECHNICIAN, Role.CHECKER, Role.APPROVER, Role.MANAGER})


class LabProfile(models.Model):
    """One per user. Lab staff hold one or more staff roles; a client user belongs to one organisation.

    A person is either staff or a client, never both: the database refuses a profile that mixes them.
    """

    user = models.OneToOneField(
        settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="lab_profile"
    )
    is_technician = models.BooleanField(default=False)
    is_checker = models.BooleanField(default=False)
    is_approver = models.BooleanField(default=False, help_text="Approving engineer.")
    is_manager = models.BooleanField(default=False, help_text="Lab manager.")
    organisation = models.ForeignKey(
        "testing.Organisation",
        on_delete=models.PROTECT,
        null=True,
        blank=True,
        related_name="members",
        help_text="Set for client users only: the organisation whose issued work they may see.",
    )
    job_title = models.CharField(max_length=120, blank=True)

    class Meta:
        constraints = [
            models.CheckConstraint(
                name="profile_client_xor_staff",
                condition=Q(organisation__isnull=True)
                | Q(is_technician=False, is_checker=False, is_approver=False, is_manager=False),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.user} ({', '.join(r.label for r in self.roles) or 'no role'})"

    @property
    def roles(self) -> list[Role]:
        roles = [
            role
            for role, flag in (
                (Role.TECHNICIAN, self.is_technician),
                (Role.CHECKER, self.is_checker),
                (Role.APPROVER, self.is_approver),
                (Role.MANAGER, self.is_manager),
            )
            if flag
        ]
        if self.organisation_id is not None:
            roles.append(Role.CLIENT)
        return roles

    @property
    def is_staff_member(self) -> bool:
        return any(r in STAFF_ROLES for r in self.roles)
