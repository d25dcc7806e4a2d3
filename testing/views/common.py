"""What every staff page shares: who may open it, and how a refused action is shown."""

from __future__ import annotations

from collections.abc import Callable
from functools import wraps
from typing import Any, TypeVar, cast

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied
from django.http import Http404, HttpRequest, HttpResponse
from django.urls import NoReverseMatch, reverse

from testing import access

V = TypeVar("V", bound=Callable[..., HttpResponse])

CAUTION = (
    "Results apply only to the specimens tested; design parameters are for a qualified "
    "geotechnical engineer under local codes and licensed practice."
)


def staff_page(view: V) -> V:
    """Signed-in lab staff only. Anonymous and deactivated users go to the sign-in page; a client
    user gets 404, exactly as for a page that does not exist (the portal is their side)."""

    @wraps(view)
    def wrapper(request: HttpRequest, *args: Any, **kwargs: Any) -> HttpResponse:
        if not access.is_lab_staff(request.user):
            raise Http404("No such page.")
        return view(request, *args, **kwargs)

    return cast(V, login_required(wrapper))


def manager_page(view: V) -> V:
    """The lab manager only; other staff are told they lack the role (403)."""

    @wraps(view)
    def wrapper(request: HttpRequest, *args: Any, **kwargs: Any) -> HttpResponse:
        if not access.can_manage(request.user):
            raise PermissionDenied("This page is for the lab manager.")
        return view(request, *args, **kwargs)

    return staff_page(cast(V, wrapper))


def staff_user(request: HttpRequest) -> User:
    """The request's user, typed, once ``staff_page`` has let it through."""
    user = request.user
    assert isinstance(user, User)
    return user


def show_refusal(request: HttpRequest, error: Exception) -> None:
    """A service refused: show its message as it is (services write them for people)."""
    messages.error(request, str(error))


def optional_url(name: str, *args: object) -> str | None:
    """The URL of a page another app may provide (reports), or None while it does not exist."""
    try:
        return reverse(name, args=args)
    except NoReverseMatch:
        return None
