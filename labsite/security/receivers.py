"""Access ends with the password or the account.

Django already ends other sessions when a password changes (the session carries a hash of it) and
refuses sessions of a deactivated user; API tokens carry no such hash, so they are deleted here.
"""

from __future__ import annotations

import logging
from typing import Any

from django.contrib.auth.models import User
from django.contrib.auth.signals import user_logged_in
from django.db.models.signals import post_save, pre_save
from django.dispatch import receiver
from django.http import HttpRequest
from knox.models import AuthToken

from labsite.security.sessions import mark_signed_in

logger = logging.getLogger(__name__)
_REVOKE_FLAG = "_tauline_revoke_access"


@receiver(user_logged_in)
def start_session_clock(
    sender: Any, request: HttpRequest | None, user: User, **kwargs: Any
) -> None:
    if request is not None and hasattr(request, "session"):
        mark_signed_in(request)


@receiver(pre_save, sender=User)
def note_credential_change(sender: type[User], instance: User, **kwargs: Any) -> None:
    update_fields = kwargs.get("update_fields")
    if instance.pk is None or (
        update_fields is not None and not {"password", "is_active"} & set(update_fields)
    ):
        return
    before = User.objects.filter(pk=instance.pk).values("password", "is_active").first()
    if before is None:
        return
    changed = before["password"] != instance.password
    deactivated = before["is_active"] and not instance.is_active
    if changed or deactivated:
        setattr(instance, _REVOKE_FLAG, "password changed" if changed else "deactivated")


@receiver(post_save, sender=User)
def revoke_api_tokens(sender: type[User], instance: User, **kwargs: Any) -> None:
    why = getattr(instance, _REVOKE_FLAG, None)
    if why is None:
        return
    delattr(instance, _REVOKE_FLAG)
    deleted, _ = AuthToken.objects.filter(user=instance).delete()
    logger.info("user %s %s: %d API token(s) revoked", instance.pk, why, deleted)
