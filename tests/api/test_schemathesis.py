"""Property-based requests over the OpenAPI schema (Schemathesis), in-process, as anonymous, client A
and a technician: no server error, and every documented response matches its schema and content type.

Bounded: 6 examples per operation and persona, no shrinking.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
import schemathesis
from django.core import signals
from django.db import close_old_connections
from hypothesis import HealthCheck, Phase, settings
from knox.models import AuthToken
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
)

from labsite.wsgi import application
from tests.api.conftest import World, persona_user

PERSONAS = ("anonymous", "client_a", "technician")
Headers = dict[str, dict[str, str]]
CHECKS = [not_a_server_error, response_schema_conformance, content_type_conformance]


# Loaded at collection through the WSGI app (no database needed to describe the API).
schema = schemathesis.openapi.from_wsgi("/api/schema/?format=json", application)
# Generated examples and fuzzing only: the coverage phase enumerates every boundary case of every
# parameter, which is far beyond this suite's time budget.
schema.config.phases.update(phases=["examples", "fuzzing"])


@pytest.fixture(autouse=True)
def _keep_the_test_connection() -> Iterator[None]:
    """Calls go straight to the WSGI app, so Django's request signals would close the database
    connection after each one (it is inside the test's transaction); Django's own test client
    disconnects the same handler for the same reason."""
    signals.request_started.disconnect(close_old_connections)
    signals.request_finished.disconnect(close_old_connections)
    try:
        yield
    finally:
        signals.request_started.connect(close_old_connections)
        signals.request_finished.connect(close_old_connections)


@pytest.fixture(autouse=True)
def _media_in_a_temporary_folder(settings: Any, tmp_path: Path) -> None:
    """A generated upload that reaches a stage stores its original here, not in the site's media."""
    settings.MEDIA_ROOT = tmp_path / "media"


@pytest.fixture
def auth_headers(plain_world: World) -> Headers:
    headers: dict[str, dict[str, str]] = {}
    for persona in PERSONAS:
        user = persona_user(plain_world.cast, persona)
        if user is None:
            headers[persona] = {}
        else:
            _, token = AuthToken.objects.create(user=user)
            headers[persona] = {"Authorization": f"Token {token}"}
    return headers


def _bounded(test: Any) -> Any:
    """6 examples per operation, no shrinking, reproducible; a security-suite test."""
    test = settings(
        max_examples=6,
        deadline=None,
        derandomize=True,
        database=None,
        phases=[Phase.explicit, Phase.generate],
        suppress_health_check=list(HealthCheck),
    )(test)
    test = schema.parametrize()(test)
    test = pytest.mark.timeout(240)(test)
    test = pytest.mark.django_db(test)
    return pytest.mark.security(test)


def _check_case(case: Any, headers: dict[str, str]) -> None:
    """Call the operation and validate the response against the schema (raises on a violation)."""
    if case.path == "/api/v1/auth/logout/":
        return  # revoking would spend the persona's token for the rest of the run
    case.call_and_validate(headers=headers, checks=CHECKS)


@_bounded
def test_schema_holds_for_anonymous_callers(case: Any, auth_headers: Headers) -> None:
    _check_case(case, auth_headers["anonymous"])


@_bounded
def test_schema_holds_for_client_a(case: Any, auth_headers: Headers) -> None:
    _check_case(case, auth_headers["client_a"])


@_bounded
def test_schema_holds_for_a_technician(case: Any, auth_headers: Headers) -> None:
    _check_case(case, auth_headers["technician"])
