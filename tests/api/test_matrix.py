"""Every API route × method × persona, on client A's and client B's records, against matrix.py."""

from __future__ import annotations

import re
from typing import Any

import pytest
from django.db import transaction
from django.urls import reverse
from rest_framework.test import APIClient

from tests.api.conftest import World, persona_user, token_client
from tests.api.matrix import MATRIX, METHODS, PERSONAS
from tests.api.routes import (
    ACTION_BODIES,
    api_routes,
    call,
    create_payload,
    detail_url,
    takes_pk,
    target_object,
    token_body,
)


def test_every_resolved_api_route_is_in_the_matrix() -> None:
    resolved = {name for name, _ in api_routes()}
    missing = sorted(resolved - set(MATRIX))
    stale = sorted(set(MATRIX) - resolved)
    assert not missing, f"API routes missing from tests/api/matrix.py: {missing}"
    assert not stale, f"matrix.py lists routes that no longer resolve: {stale}"
    incomplete = {route: sorted(set(METHODS) - set(rows)) for route, rows in MATRIX.items()}
    assert not {r: m for r, m in incomplete.items() if m}, incomplete
    for route, rows in MATRIX.items():
        for method, row in rows.items():
            assert set(row) == set(PERSONAS), (route, method)


def _body(route: str, method: str, persona: str, world: World, side: Any) -> dict[str, Any] | None:
    if method not in {"POST", "PUT", "PATCH"}:
        return None
    if route == "api:token":
        user = persona_user(world.cast, persona)
        return token_body(None if user is None else user.username)
    if route in ACTION_BODIES:
        return ACTION_BODIES[route]
    if route == "api:stage-force-calibration":  # the device of the stage's own side
        return {"device": side.force_device.pk, "on": "2026-06-01"}
    if route.endswith("-list") and side is not None:
        return create_payload(route, world, side)
    return {}


def _plan(route: str, expected: Any, world: World) -> list[tuple[str, Any, int]]:
    """(url, side, expected status) for each target of one cell."""
    pair = expected if isinstance(expected, tuple) else (expected, expected)
    sides = ((world.a, pair[0]), (world.b, pair[1]))
    if takes_pk(route):
        return [
            (detail_url(route, target_object(route, side).pk), side, status)
            for side, status in sides
        ]
    if route.endswith("-list") and route not in {"api:throughput-list"}:
        return [(reverse(route), side, status) for side, status in sides]
    return [(reverse(route), None, pair[0])]


@pytest.mark.django_db
def test_every_persona_gets_what_the_matrix_says(world: World) -> None:
    clients = {p: token_client(persona_user(world.cast, p)) for p in PERSONAS}
    failures: list[str] = []
    checked = 0
    for route, rows in MATRIX.items():
        for method, row in rows.items():
            for persona, expected in row.items():
                for url, side, status in _plan(route, expected, world):
                    if route == "api:logout":
                        # Revoking spends the token: give each request one of its own.
                        client: APIClient = token_client(persona_user(world.cast, persona))
                    else:
                        client = clients[persona]
                    body = _body(route, method, persona, world, side)
                    # Each request runs in a savepoint rolled back afterwards, so every cell starts
                    # from the same records (a transition or a create does not affect the next).
                    with transaction.atomic():
                        response = call(client, method, url, body)
                        transaction.set_rollback(True)
                    checked += 1
                    if response.status_code != status:
                        failures.append(
                            f"{persona} {method} {url} ({route}): {response.status_code}, expected "
                            f"{status}: {getattr(response, 'data', b'')!r:.200}"
                        )
                    elif status >= 400 and route not in {"api:docs", "api:schema"}:
                        # (the schema and docs answer in YAML/HTML; their errors are not JSON)
                        data = response.json()
                        if set(data) != {"detail", "errors"}:
                            failures.append(f"{persona} {method} {url}: error body {data!r:.200}")
    assert not failures, f"{len(failures)} of {checked} cells differ:\n" + "\n".join(failures)
    assert checked > 8 * 5 * len(MATRIX)  # every persona × method × route, twice for pairs


STAFF = ("technician", "checker", "approver", "manager")


def _offered(row: dict[str, Any]) -> bool:
    """Some lab-staff persona gets past "method not allowed" (405) on some target."""
    cells = [row[p] for p in STAFF]
    return any(
        status != 405 for cell in cells for status in (cell if isinstance(cell, tuple) else (cell,))
    )


def _id_or_nothing(match: re.Match[str]) -> str:
    """The router's ``(?P<pk>...)`` is the schema's ``{id}``; its anchors are dropped."""
    return "" if match.group(0) in {"^", "$"} else "{id}"


@pytest.mark.django_db
def test_the_openapi_schema_documents_exactly_the_methods_the_matrix_offers() -> None:
    """Every method the matrix expects to work is in the schema, and every 405 is intentional:
    the schema does not document it either (records change through actions, not PUT/PATCH/DELETE)."""
    response: Any = APIClient().get(reverse("api:schema"), {"format": "json"})
    schema = response.json()
    documented = {
        path: {method.upper() for method in operations if method.upper() in METHODS}
        for path, operations in schema["paths"].items()
    }
    differences = []
    checked = 0
    for route, pattern in api_routes():
        if not pattern.startswith("api/v1/") or route == "api:api-root":
            continue  # the schema, its docs page and the browsable root are not API operations
        path = "/" + re.sub(r"\(\?P<pk>[^)]*\)|<pk>|\^|\$", _id_or_nothing, pattern)
        offered = {method for method, row in MATRIX[route].items() if _offered(row)}
        if documented.get(path, set()) != offered:
            differences.append(f"{route} {path}: schema {documented.get(path)}, matrix {offered}")
        checked += 1
    assert not differences, "\n".join(differences)
    assert checked == len(MATRIX) - 3  # all but the schema, its docs page and the root
