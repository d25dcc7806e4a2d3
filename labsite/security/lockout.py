"""What a locked-out sign-in is answered with: the same words for every user name, known or not."""

from __future__ import annotations

from typing import Any

from django.conf import settings
from django.http import HttpRequest, HttpResponse, JsonResponse
from django.shortcuts import render

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
