"""Session time limits: signed out after a spell of inactivity, and in any case after a fixed time.

Django's own ``SESSION_COOKIE_AGE`` only bounds the cookie; these limits are kept in the session
itself, so a stolen or forgotten cookie stops working server-side as well.
"""

from __future__ import annotations

import time
from collections.abc import Callable

from django.conf import settings
from django.contrib import messages
from django.contrib.auth import logout
from django.http import HttpRequest, HttpResponse

STARTED_KEY = "tauline_signed_in_at"
SEEN_KEY = "tauline_seen_at"


def now_s() -> int:
    return int(time.time())


def mark_signed_in(request: HttpRequest) -> None:
    now = now_s()
    request.session[STARTED_KEY] = now
    request.session[SEEN_KEY] = now


def _refresh_interval_s(idle_s: int) -> int:
    # Writing the session on every request is wasteful; a tenth of the idle limit (at most a minute)
    # is precise enough.
    return max(1, min(60, idle_s // 10))


class SessionLimitsMiddleware:
    """Ends a signed-in session that has been idle or open too long (after AuthenticationMiddleware)."""

    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        user = getattr(request, "user", None)
        if user is not None and user.is_authenticated:
            self._check(request)
        return self.get_response(request)

    def _check(self, request: HttpRequest) -> None:
        idle_s = settings.TAULINE_SESSION_IDLE_MINUTES * 60
        absolute_s = settings.TAULINE_SESSION_ABSOLUTE_HOURS * 3600
        session = request.session
        now = now_s()
        started = session.get(STARTED_KEY)
        seen = session.get(SEEN_KEY)
        if not isinstance(started, int) or not isinstance(seen, int):
            mark_signed_in(request)  # a session from before these limits: start counting now
            return
        reason = ""
        if now - started > absolute_s:
            reason = f"after {settings.TAULINE_SESSION_ABSOLUTE_HOURS} h"
        elif now - seen > idle_s:
            reason = f"after {settings.TAULINE_SESSION_IDLE_MINUTES} min without activity"
        if reason:
            logout(request)
            messages.info(request, f"You were signed out {reason}. Please sign in again.")
            return
        if now - seen >= _refresh_interval_s(idle_s):
            session[SEEN_KEY] = now
