"""Security headers on every resolved GET route, signed in as a technician and signed out.

Reliability plan row "headers": every route → CSP (django-csp) with a fresh nonce per response,
HSTS, nosniff, Referrer-Policy; secure, HttpOnly, SameSite cookies. Header meanings: W3C Content
Security Policy Level 3, RFC 6797 (HSTS), the Fetch standard (nosniff), W3C Referrer Policy.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from typing import Any

import pytest
from django.test import Client
from django.urls import URLPattern, URLResolver, get_resolver, reverse
from django.urls.exceptions import NoReverseMatch

from reports.models import ReportRevision
from testing.models import ShearStage
from tests.conftest import PASSWORD, Cast

pytestmark = pytest.mark.security

NONCE = re.compile(r"'nonce-([A-Za-z0-9+/=]+)'")


def _routes() -> Iterator[tuple[str, str, list[str]]]:
    """(``namespace:name`` or "", full pattern, parameter names) for every route."""

    def walk(
        patterns: list[Any], prefix: str, namespace: str | None
    ) -> Iterator[tuple[str, str, list[str]]]:
        for pattern in patterns:
            if isinstance(pattern, URLResolver):
                yield from walk(
                    pattern.url_patterns,
                    prefix + str(pattern.pattern),
                    pattern.namespace or namespace,
                )
            elif isinstance(pattern, URLPattern):
                name = pattern.name or ""
                if name and namespace:
                    name = f"{namespace}:{name}"
                regex = pattern.pattern.regex
                params = list(regex.groupindex) or ["*"] * regex.groups  # "*": positional
                yield name, prefix + str(pattern.pattern), params

    yield from walk(get_resolver().url_patterns, "", None)


def _values(revision: ReportRevision) -> dict[str, Any]:
    """A real object for each parameter name, so most pages answer with their content."""
    test = revision.report.tests.get()
    stage = ShearStage.objects.filter(test=test).first()
    assert stage is not None
    sample = stage.specimen.sample
    return {
        "project_id": revision.report.project_id,
        "borehole_id": sample.borehole_id,
        "sample_id": sample.pk,
        "specimen_id": stage.specimen_id,
        "test_id": test.pk,
        "stage_id": stage.pk,
        "public_id": revision.public_id,
        "action": "check",
        "version": "0",
        "app_label": "testing",
        "object_id": "1",
        "content_type_id": 1,
        "url": "x",
        "format": "json",
        "file_format": "csv",
        "id": 1,
        "uidb64": "x",
        "token": "x",
    }


def _api_pk(name: str, revision: ReportRevision, values: dict[str, Any]) -> Any:
    by_prefix = {
        "api:report-revision": revision.pk,
        "api:project": values["project_id"],
        "api:borehole": values["borehole_id"],
        "api:sample": values["sample_id"],
        "api:specimen": values["specimen_id"],
        "api:test-set": values["test_id"],
        "api:stage": values["stage_id"],
    }
    for prefix, pk in by_prefix.items():
        if name.startswith(prefix + "-"):
            return pk
    return 1


def _urls(revision: ReportRevision) -> list[str]:
    values = _values(revision)
    urls = []
    for name, full, params in _routes():
        if not name:  # unnamed (the admin's catch-all): fill the path pattern itself
            assert "^" not in full, full
            urls.append("/" + re.sub(r"<(?:\w+:)?(\w+)>", lambda m: str(values[m[1]]), full))
            continue
        if params and params[0] == "*":
            urls.append(reverse(name, args=["1"] * len(params)))
            continue
        kwargs = {}
        for param in params:
            if param == "pk":
                kwargs[param] = (
                    _api_pk(name, revision, values) if name.startswith("api:") else revision.pk
                )
            else:
                kwargs[param] = values[param]
        try:
            urls.append(reverse(name, kwargs=kwargs))
        except NoReverseMatch:
            if "format" in params:  # DRF's optional-suffix twins of routes already listed
                continue
            raise
    return sorted(set(urls))


def _check(response: Any, url: str, nonces: list[str]) -> None:
    policy = response.get("Content-Security-Policy", "")
    where = f"{url} ({response.status_code})"
    assert "default-src 'self'" in policy, where
    assert "frame-ancestors 'none'" in policy, where
    assert "object-src 'none'" in policy, where
    assert "unsafe-inline" not in policy and "unsafe-eval" not in policy, where
    assert response.get("X-Content-Type-Options") == "nosniff", where
    assert response.get("Referrer-Policy") == "same-origin", where
    assert response.get("X-Frame-Options") == "DENY", where
    assert response.get("Strict-Transport-Security") == "max-age=31536000; includeSubDomains", where
    found = NONCE.findall(policy)
    content_type = response.get("Content-Type", "")
    body = b"" if getattr(response, "streaming", False) else response.content
    if content_type.startswith("text/html"):
        for tag in re.findall(rb"<script[^>]*>", body):
            source = re.search(rb'src="([^"]*)"', tag)
            if b'type="application/json"' in tag:  # data, never executed
                continue
            if source is None:  # inline: runs only with this response's nonce
                assert found, f"{where}: an inline script but no nonce in the policy"
                assert f'nonce="{found[0]}"'.encode() in tag, f"{where}: {tag!r}"
            else:  # from this site (script-src 'self'), never another host
                assert source[1].startswith(b"/") and not source[1].startswith(b"//"), tag
    nonces += list(dict.fromkeys(found))


@pytest.fixture
def hsts(settings: Any) -> None:
    """Production's HSTS, sent on every HTTPS response (requests below are made as HTTPS)."""
    settings.SECURE_HSTS_SECONDS = 31536000
    settings.SECURE_HSTS_INCLUDE_SUBDOMAINS = True
    settings.SESSION_COOKIE_SECURE = True
    settings.CSRF_COOKIE_SECURE = True


def test_every_get_route_carries_the_security_headers_and_a_fresh_nonce(
    hsts: None, cast: Cast, issued_revision: ReportRevision
) -> None:
    urls = _urls(issued_revision)
    assert len(urls) > 60, urls  # the whole map, not a sample (admin, API, pages, portal, reports)
    technician = Client()
    technician.force_login(cast.technician)
    nonces: list[str] = []
    statuses: dict[str, set[int]] = {"technician": set(), "anonymous": set()}
    for who, client in (("technician", technician), ("anonymous", Client())):
        for url in urls:
            response = client.get(url, secure=True)
            statuses[who].add(response.status_code)
            _check(response, url, nonces)
    # Real pages were rendered, not only redirects and errors.
    assert 200 in statuses["technician"] and 200 in statuses["anonymous"]
    assert 302 in statuses["anonymous"]
    # A fresh nonce per response: never the same twice.
    assert len(nonces) > 20
    assert len(nonces) == len(set(nonces))


def test_sign_in_sets_secure_httponly_samesite_cookies(hsts: None, cast: Cast) -> None:
    client = Client()
    page = client.get(reverse("login"), secure=True)
    csrf = page.cookies["csrftoken"]
    assert csrf["secure"] and csrf["samesite"] == "Lax"
    response = client.post(
        reverse("login"),
        {"username": "tech", "password": PASSWORD},
        secure=True,
        REMOTE_ADDR="10.20.0.1",
    )
    assert response.status_code == 302
    session = response.cookies["sessionid"]
    assert session["secure"] is True
    assert session["httponly"] is True
    assert session["samesite"] == "Lax"
    assert int(session["max-age"]) == 12 * 3600
