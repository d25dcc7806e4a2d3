"""Writing the audit trail. Every workflow action and every data change goes through here."""

from __future__ import annotations

import json
from typing import Any

from django.contrib.auth.models import AnonymousUser, User
from django.utils import timezone

from reports.models import AuditEvent


def _jsonable(value: Any) -> Any:
    """Values as JSON can hold them; anything else as its text."""
    try:
        json.dumps(value, allow_nan=False)
    except (TypeError, ValueError):
        return str(value)
    return value


def actor_name(user: User | AnonymousUser | None) -> str:
    if user is None or not user.is_authenticated:
        return ""
    return user.get_full_name() or user.get_username()


def audit_record(
    *,
    actor: User | AnonymousUser | None,
    action: str,
    subject: str,
    field: str = "",
    old: Any = None,
    new: Any = None,
    reason: str = "",
) -> AuditEvent:
    """Append one audit event (UTC time, actor, before/after, reason)."""
    return AuditEvent.objects.create(
        at=timezone.now(),
        actor=actor if actor is not None and actor.is_authenticated else None,
        actor_name=actor_name(actor),
        action=action,
        subject=subject,
        field=field,
        old_value=_jsonable(old),
        new_value=_jsonable(new),
        reason=reason,
    )
