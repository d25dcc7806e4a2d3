"""The lockout check in front of Django's own password backend."""

from __future__ import annotations

from typing import Any

from axes.backends import AxesStandaloneBackend
from django.contrib.auth import get_user_model
from django.contrib.auth.backends import ModelBackend
from django.http import HttpRequest


class LockoutBackend(AxesStandaloneBackend):
    """django-axes' lockout check for every sign-in that comes from a web request.

    A call without a request (a management command, a test client's ``login``) cannot be locked
    out by address or recorded against a request, so it is left to the password backend alone.
    """

    def authenticate(
        self,
        request: HttpRequest | None,
        username: str | None = None,
        password: str | None = None,
        **kwargs: Any,
    ) -> None:
        if request is None:
            return None
        super().authenticate(request, username=username, password=password, **kwargs)
        return None


class PasswordBackend(ModelBackend):
    """Django's password backend, loading the signed-in user's lab profile (roles) with the user:
    every page asks for the roles, so this saves a query on every request."""

    def get_user(self, user_id: Any) -> Any:
        user_model = get_user_model()
        try:
            user = user_model._default_manager.select_related("lab_profile").get(pk=user_id)
        except (user_model.DoesNotExist, ValueError, TypeError):
            return None
        return user if self.user_can_authenticate(user) else None
