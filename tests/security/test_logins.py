"""Sign-in protection: lockout, no user enumeration, sessions ending, session time limits.

Reliability plan row "logins": 30 wrong passwords on one account → locked after ≤ 10; the correct
password is refused while locked. Practices checked (OWASP ASVS 5.0, authentication and session
management chapters, from memory): every attempt logged; the same answer for an unknown user, a
wrong password and a deactivated account; sessions end on password change and deactivation; idle
and absolute session timeouts.
"""

from __future__ import annotations

import re
from typing import Any

import pytest
from axes.models import AccessAttempt, AccessFailureLog, AccessLog
from axes.utils import reset
from django.contrib.auth.models import User
from django.test import Client
from django.urls import reverse
from knox.models import AuthToken
from rest_framework.test import APIClient

from labsite.security.sessions import SEEN_KEY, STARTED_KEY, now_s
from tests.conftest import PASSWORD, Cast

pytestmark = pytest.mark.security

LIMIT = 10  # the plan's bar: locked after at most 10 failures


def _sign_in(client: Client, username: str, password: str, address: str = "10.1.1.1") -> Any:
    return client.post(
        reverse("login"), {"username": username, "password": password}, REMOTE_ADDR=address
    )


def _signed_in(client: Client) -> bool:
    return "_auth_user_id" in client.session


def test_thirty_wrong_passwords_lock_the_account_and_the_right_one_is_refused(
    cast: Cast, settings: Any
) -> None:
    assert settings.AXES_FAILURE_LIMIT <= LIMIT
    client = Client()
    # A different address for each attempt, so it is the account that locks, not the address.
    statuses = [
        _sign_in(client, "tech", f"wrong-{i}", address=f"10.2.0.{i}").status_code
        for i in range(1, 31)
    ]
    first_locked = statuses.index(429) + 1
    assert first_locked <= LIMIT, statuses
    assert all(s == 200 for s in statuses[: first_locked - 1])  # the form, re-shown with an error
    assert all(s == 429 for s in statuses[first_locked - 1 :])

    locked = _sign_in(client, "tech", PASSWORD, address="10.2.1.1")
    assert locked.status_code == 429
    assert not _signed_in(client)
    assert "Sign-in paused" in locked.content.decode()
    # Every attempt is on record: 30 wrong ones and the refused right one.
    assert AccessFailureLog.objects.filter(username="tech").count() == 31
    assert AccessLog.objects.filter(username="tech").count() == 0

    # The lab manager lifts the lock; then the right password works and is logged.
    reset(username="tech")
    assert _sign_in(client, "tech", PASSWORD, address="10.2.1.1").status_code == 302
    assert _signed_in(client)
    assert AccessLog.objects.filter(username="tech").count() == 1


def test_one_address_trying_many_names_is_locked_too(cast: Cast) -> None:
    client = Client()
    statuses = [
        _sign_in(client, f"guess-{i}", "Password1", address="10.3.0.9").status_code
        for i in range(30)
    ]
    assert statuses.index(429) + 1 <= LIMIT
    # A real user behind that address is refused while it is locked, right password or not.
    assert _sign_in(client, "checker", PASSWORD, address="10.3.0.9").status_code == 429
    assert not _signed_in(client)
    # Another address is unaffected.
    assert _sign_in(Client(), "checker", PASSWORD, address="10.3.0.10").status_code == 302


def test_the_api_token_endpoint_is_locked_with_the_same_counter(cast: Cast, settings: Any) -> None:
    settings.TAULINE_API_THROTTLE_RATES = {
        **settings.TAULINE_API_THROTTLE_RATES,
        "token": "1000/minute",
    }
    api = APIClient()
    url = reverse("api:token")
    statuses = [
        api.post(
            url, {"username": "tech", "password": f"no-{i}"}, REMOTE_ADDR=f"10.4.0.{i}"
        ).status_code
        for i in range(1, 31)
    ]
    assert statuses.index(429) + 1 <= LIMIT, statuses
    refused = api.post(url, {"username": "tech", "password": PASSWORD}, REMOTE_ADDR="10.4.1.1")
    assert refused.status_code == 429
    assert "token" not in refused.json()
    assert set(refused.json()) == {"detail", "errors"}
    assert AuthToken.objects.filter(user=cast.technician).count() == 0
    assert AccessFailureLog.objects.filter(username="tech").count() == 31


def _normalised(html: bytes, username: str) -> str:
    text = html.decode()
    text = re.sub(r'name="csrfmiddlewaretoken" value="[^"]*"', "csrf", text)
    text = re.sub(r'nonce="[^"]*"', 'nonce=""', text)
    return text.replace(f'value="{username}"', 'value="<name>"')


def test_unknown_user_wrong_password_and_deactivated_account_get_the_same_page(
    cast: Cast,
) -> None:
    answers = {
        "wrong password": _sign_in(Client(), "tech", "not-it", address="10.5.0.1"),
        "unknown user": _sign_in(Client(), "nobody-here", "not-it", address="10.5.0.2"),
        "deactivated, right password": _sign_in(Client(), "former", PASSWORD, address="10.5.0.3"),
    }
    names = {"wrong password": "tech", "unknown user": "nobody-here"}
    names["deactivated, right password"] = "former"
    statuses = {k: r.status_code for k, r in answers.items()}
    assert set(statuses.values()) == {200}, statuses
    bodies = {_normalised(r.content, names[k]) for k, r in answers.items()}
    assert len(bodies) == 1
    assert "did not match" in bodies.pop()


def test_unknown_and_known_user_names_lock_alike(cast: Cast) -> None:
    """A lockout says nothing either: an unknown name locks after as many tries, with the same page."""
    pages = {}
    for name in ("tech", "nobody-here"):
        client = Client()
        statuses = [
            _sign_in(client, name, "nope", address=f"10.6.{len(pages)}.{i}").status_code
            for i in range(12)
        ]
        pages[name] = (statuses, _sign_in(client, name, "nope", address="10.6.9.9").content)
    assert pages["tech"][0] == pages["nobody-here"][0]
    strip = re.compile(rb'nonce="[^"]*"')
    assert strip.sub(b"", pages["tech"][1]) == strip.sub(b"", pages["nobody-here"][1])


def test_api_token_answers_are_the_same_for_unknown_wrong_and_deactivated(cast: Cast) -> None:
    api = APIClient()
    url = reverse("api:token")
    bodies = [
        api.post(url, {"username": u, "password": p}, REMOTE_ADDR=f"10.7.0.{i}")
        for i, (u, p) in enumerate(
            [("tech", "not-it"), ("nobody-here", "not-it"), ("former", PASSWORD)]
        )
    ]
    assert {r.status_code for r in bodies} == {400}
    assert len({r.content for r in bodies}) == 1


def _signed_in_client(user: User) -> Client:
    client = Client()
    response = _sign_in(client, user.username, PASSWORD, address="10.8.0.1")
    assert response.status_code == 302
    assert client.get(reverse("worklist")).status_code == 200
    return client


def test_a_password_change_ends_every_session_and_token(cast: Cast) -> None:
    laptop, bench = _signed_in_client(cast.technician), _signed_in_client(cast.technician)
    _, token = AuthToken.objects.create(user=cast.technician)
    api = APIClient()
    api.credentials(HTTP_AUTHORIZATION=f"Token {token}")
    assert api.get(reverse("api:project-list")).status_code == 200

    user = User.objects.get(pk=cast.technician.pk)
    user.set_password("a-brand-new-passphrase-2026")
    user.save()

    for client in (laptop, bench):
        response = client.get(reverse("worklist"))
        assert response.status_code == 302 and reverse("login") in response["Location"]
    assert api.get(reverse("api:project-list")).status_code == 401
    assert AuthToken.objects.filter(user=user).count() == 0


def test_deactivation_ends_every_session_and_token(cast: Cast) -> None:
    client = _signed_in_client(cast.checker)
    _, token = AuthToken.objects.create(user=cast.checker)
    user = User.objects.get(pk=cast.checker.pk)
    user.is_active = False
    user.save(update_fields=["is_active"])
    response = client.get(reverse("worklist"))
    assert response.status_code == 302 and reverse("login") in response["Location"]
    api = APIClient()
    api.credentials(HTTP_AUTHORIZATION=f"Token {token}")
    assert api.get(reverse("api:project-list")).status_code == 401


def test_saving_a_user_without_changing_credentials_keeps_the_token(cast: Cast) -> None:
    AuthToken.objects.create(user=cast.manager)
    user = User.objects.get(pk=cast.manager.pk)
    user.first_name = "Morag"
    user.save()
    assert AuthToken.objects.filter(user=user).count() == 1


def _age_session(client: Client, *, started_ago_s: int, seen_ago_s: int) -> None:
    session = client.session
    session[STARTED_KEY] = now_s() - started_ago_s
    session[SEEN_KEY] = now_s() - seen_ago_s
    session.save()


def test_an_idle_session_ends(cast: Cast, settings: Any) -> None:
    settings.TAULINE_SESSION_IDLE_MINUTES = 30
    client = _signed_in_client(cast.technician)
    _age_session(client, started_ago_s=29 * 60, seen_ago_s=29 * 60)
    assert client.get(reverse("worklist")).status_code == 200  # still inside the limit
    _age_session(client, started_ago_s=31 * 60, seen_ago_s=30 * 60 + 5)
    response = client.get(reverse("worklist"))
    assert response.status_code == 302 and reverse("login") in response["Location"]
    assert not _signed_in(client)


def test_activity_keeps_a_session_alive_until_the_absolute_limit(cast: Cast, settings: Any) -> None:
    settings.TAULINE_SESSION_IDLE_MINUTES = 30
    settings.TAULINE_SESSION_ABSOLUTE_HOURS = 8
    client = _signed_in_client(cast.technician)
    _age_session(client, started_ago_s=7 * 3600, seen_ago_s=25 * 60)
    assert client.get(reverse("worklist")).status_code == 200
    assert now_s() - client.session[SEEN_KEY] < 5  # the request counted as activity
    _age_session(client, started_ago_s=8 * 3600 + 5, seen_ago_s=10)
    response = client.get(reverse("worklist"))
    assert response.status_code == 302
    assert not _signed_in(client)


def test_failed_attempts_are_kept_per_name_and_address(cast: Cast) -> None:
    _sign_in(Client(), "approver", "nope", address="10.9.0.1")
    attempt = AccessAttempt.objects.get(username="approver")
    assert attempt.failures_since_start == 1
    assert attempt.ip_address == "10.9.0.1"
    assert "nope" not in (attempt.post_data or "")  # the password is not stored
