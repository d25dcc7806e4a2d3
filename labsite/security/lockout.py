"""What a locked-out sign-in is answered with: the same words for every user name, known or not;
and the same lock for passwords typed again elsewhere (report sign-offs), counted where django-axes
counts failed sign-ins, so wrong sign-in and sign-off passwords share one limit."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from django.conf import settings
from django.http import HttpRequest, HttpResponse, JsonResponse
from django.shortcuts import render
from django.utils import timezone

LOCKED_MESSAGE = (
    "Too many failed sign-in attempts for this user name. Sign-in is paused; try again later "
    "or ask the lab manager to unlock the account."
)


def lockout_response(
    request: HttpRequest, original_response: HttpResponse | None = None, credentials: Any = None
) -> HttpResponse:
    """HTTP 429: JSON in the API's error shape for API calls, the sign-in page's layout otherwise."""
    if request.path.startswith("/api/"):
        return JsonResponse({"detail": LOCKED_MESSAGE, "errors": {}}, status=429)
    context = {"message": LOCKED_MESSAGE, "minutes": settings.TAULINE_LOGIN_LOCKOUT_MINUTES}
    return render(request, "registration/locked_out.html", context, status=429)


# --- Passwords typed again to sign (report sign-offs) ---------------------------------------------

SIGN_OFF_AGENT = "Tauline report sign-off"


def password_lock(username: str, now: datetime) -> tuple[bool, datetime | None]:
    """Whether failed sign-ins and sign-offs lock ``username`` now, and until when (None: until the
    lock is lifted by hand). The same count axes keeps per user name within its cool-off period."""
    from axes.conf import settings as axes_settings
    from axes.helpers import get_cool_off, get_credentials, get_failure_limit
    from axes.models import AccessAttempt

    if not (axes_settings.AXES_ENABLED and axes_settings.AXES_LOCK_OUT_AT_FAILURE):
        return False, None
    limit = get_failure_limit(None, get_credentials(username))
    cool_off = get_cool_off()
    attempts = AccessAttempt.objects.filter(username=username)
    if cool_off is not None:
        attempts = attempts.filter(attempt_time__gte=now - cool_off)
    failures = 0
    # The lock lasts until enough of the newest failures have aged out of the cool-off period.
    for attempt_time, count in attempts.order_by("-attempt_time").values_list(
        "attempt_time", "failures_since_start"
    ):
        failures += count
        if failures >= limit:
            return True, (attempt_time + cool_off if cool_off is not None else None)
    return False, None


def password_failure_record(username: str, now: datetime, *, locked: bool) -> None:
    """One failed sign-off, where axes counts failed sign-ins (and logs them, if it logs those)."""
    from axes.conf import settings as axes_settings
    from axes.handlers.proxy import AxesProxyHandler
    from axes.models import AccessAttempt, AccessFailureLog

    if not axes_settings.AXES_ENABLED:
        return
    fields = {
        "username": username,
        "ip_address": None,
        "user_agent": SIGN_OFF_AGENT,
        "http_accept": "",
        "path_info": "(report sign-off)",
    }
    # A row per failure: no read-modify-write to race on, and each ages out on its own.
    AccessAttempt.objects.create(
        **fields, get_data="", post_data="", failures_since_start=1, attempt_time=now
    )
    if axes_settings.AXES_ENABLE_ACCESS_FAILURE_LOG:
        AccessFailureLog.objects.create(**fields, attempt_time=now, locked_out=locked)
        AxesProxyHandler.remove_out_of_limit_failure_logs(username=username)


def lock_words(until: datetime | None) -> str:
    if until is None:
        return "until the lab manager lifts the lock"
    return f"until {timezone.localtime(until):%Y-%m-%d %H:%M}"
