"""Request-rate limits, read from ``settings.TAULINE_API_THROTTLE_RATES`` on each request.

DRF's own throttles copy their rates when the class is imported; reading them per request lets a
deployment (and a test) change them without reloading code. Throttling slows abuse down; it is not
an access control — that is ``testing.access``.
"""

from __future__ import annotations

import hashlib
from typing import TYPE_CHECKING

from django.conf import settings
from rest_framework.request import Request
from rest_framework.throttling import AnonRateThrottle, SimpleRateThrottle, UserRateThrottle

if TYPE_CHECKING:  # importing views here would be circular: DRF imports throttles from settings
    from rest_framework.views import APIView


class _RateFromSettings(SimpleRateThrottle):
    def get_rate(self) -> str | None:
        rates: dict[str, str] = settings.TAULINE_API_THROTTLE_RATES
        return rates[str(self.scope)]


class AnonThrottle(_RateFromSettings, AnonRateThrottle):
    """Anonymous callers, counted per client address."""

    scope = "anon"


class UserThrottle(_RateFromSettings, UserRateThrottle):
    """Signed-in callers, counted per user across all their tokens and sessions."""

    scope = "user"


class TokenAddressThrottle(_RateFromSettings):
    """Token requests, counted per client address."""

    scope = "token"

    def get_cache_key(self, request: Request, view: APIView) -> str | None:
        return self.cache_format % {"scope": "token-addr", "ident": self.get_ident(request)}


class TokenUsernameThrottle(_RateFromSettings):
    """Token requests, counted per username asked for, whichever address they come from."""

    scope = "token"

    def get_cache_key(self, request: Request, view: APIView) -> str | None:
        data = request.data
        username = data.get("username") if hasattr(data, "get") else None
        if not isinstance(username, str) or not username:
            return None
        # Hashed: a username may hold characters a cache key must not.
        ident = hashlib.sha256(username.strip().lower().encode("utf-8", "replace")).hexdigest()
        return self.cache_format % {"scope": "token-user", "ident": ident}
