"""The lockout check in front of Django's own password backend."""

from __future__ import annotations

from typing import Any

from axes.backends import AxesStandaloneBackend
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
