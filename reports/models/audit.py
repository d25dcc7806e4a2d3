"""The audit trail: one append-only row per data change or workflow action."""

from __future__ import annotations

from typing import Any

from django.conf import settings
from django.db import models
from django.db.models import Q


class AuditEvent(models.Model):
    """Who did what to which object, when, the old and new values, and why.

    ``subject`` names the object (``revision:12``, ``stage:4``); ``field`` is blank for a workflow
    action. Rows are never edited or deleted (model guard and a database trigger).
    """

    at = models.DateTimeField(db_index=True, help_text="UTC time.")
    actor = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    actor_name = models.CharField(max_length=200, blank=True)
    action = models.CharField(max_length=40)
    subject = models.CharField(max_length=80, db_index=True)
    field = models.CharField(max_length=80, blank=True)
    old_value = models.JSONField(null=True, blank=True)
    new_value = models.JSONField(null=True, blank=True)
    reason = models.TextField(blank=True)

    class Meta:
        ordering = ["at", "id"]
        constraints = [
            models.CheckConstraint(name="audit_action_set", condition=~Q(action="")),
            models.CheckConstraint(name="audit_subject_set", condition=~Q(subject="")),
        ]

    def __str__(self) -> str:
        return f"{self.at:%Y-%m-%d %H:%M:%S} {self.actor_name or 'system'} {self.action} {self.subject}"

    def save(self, *args: Any, **kwargs: Any) -> None:
        if self.pk is not None:
            raise ValueError("Audit events are append-only and cannot be changed.")
        super().save(*args, **kwargs)

    def delete(self, *args: Any, **kwargs: Any) -> tuple[int, dict[str, int]]:
        raise ValueError("Audit events are append-only and cannot be deleted.")
