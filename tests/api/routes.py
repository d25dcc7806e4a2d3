"""Helpers shared by the route-walking tests: which routes exist, which object each is about, and
a valid request body for each write."""

from __future__ import annotations

import json
from collections.abc import Iterator
from typing import Any

from django.urls import URLPattern, URLResolver, get_resolver, reverse
from rest_framework.response import Response
from rest_framework.test import APIClient

from tests.api.conftest import OrgWorld, World
from tests.conftest import PASSWORD

# Route basename → the OrgWorld attribute holding that type's record.
OBJECT_OF = {
    "organisation": "organisation",
    "project": "project",
    "borehole": "borehole",
    "sample": "sample",
    "specimen": "specimen",
    "test-set": "test",
    "stage": "stage",
    "computation-run": "run",
    "stage-result": "result",
    "envelope": "envelope",
    "report-revision": "revision",  # the issued revision
    "report": "report",
    "apparatus": "apparatus",
    "force-device": "force_device",
    "calibration": "calibration",
    "gauge": "gauge",
}
# Sign-off actions act on a revision waiting for that step (the issued one would only answer 409).
OBJECT_OF_ROUTE = {
    "api:report-revision-check": "draft_revision",
    "api:report-revision-approve": "checked_revision",
    "api:report-revision-issue": "approved_revision",
    # Readings can change only while the set is unreported.
    "api:stage-readings-upload": "open_stage",
    "api:stage-force-calibration": "open_stage",
}
MISSING_ID = 987_654_321


def api_routes() -> Iterator[tuple[str, str]]:
    """(``api:name``, pattern) for every resolved route under ``/api/``."""

    def walk(patterns: list[Any], prefix: str, namespace: str | None) -> Iterator[tuple[str, str]]:
        for pattern in patterns:
            if isinstance(pattern, URLResolver):
                yield from walk(
                    pattern.url_patterns,
                    prefix + str(pattern.pattern),
                    pattern.namespace or namespace,
                )
            elif isinstance(pattern, URLPattern):
                full = prefix + str(pattern.pattern)
                if full.startswith("api/"):
                    assert namespace == "api" and pattern.name, f"unnamed API route {full}"
                    yield f"api:{pattern.name}", full

    yield from walk(get_resolver().url_patterns, "", None)


def basename(route: str) -> str | None:
    name = route.removeprefix("api:")
    candidates = [b for b in OBJECT_OF if name.startswith(f"{b}-")]
    return max(candidates, key=len) if candidates else None


def takes_pk(route: str) -> bool:
    return any("<pk>" in pattern for name, pattern in api_routes() if name == route)


def detail_url(route: str, pk: object) -> str:
    return reverse(route, kwargs={"pk": pk})


def target_object(route: str, side: OrgWorld) -> Any:
    base = basename(route)
    assert base is not None, route
    target = getattr(side, OBJECT_OF_ROUTE.get(route, OBJECT_OF[base]))
    assert target is not None, f"{route}: the world has no {base} (use the reports world)"
    return target


def create_payload(route: str, world: World, side: OrgWorld) -> dict[str, Any]:
    """A valid create body whose parent record belongs to ``side``'s organisation."""
    base = basename(route)
    if base == "organisation":
        return {
            "name": f"New client of {side.organisation.code}",
            "code": f"new-{side.organisation.code}",
        }
    if base == "project":
        return {
            "organisation": side.organisation.pk,
            "reference": f"NEW-{side.project.pk}",
            "name": "New site",
        }
    if base == "borehole":
        return {"project": side.project.pk, "reference": "BH99"}
    if base == "sample":
        return {
            "borehole": side.borehole.pk,
            "reference": "U99",
            "depth_top_m": "3.00",
            "depth_base_m": "3.45",
            "sample_type": "U",
            "received_on": "2026-11-10",
        }
    if base == "specimen":
        return {
            "sample": side.sample.pk,
            "reference": "S99",
            "depth_top_m": "3.05",
            "preparation": "undisturbed",
            "shape": "circular",
            "diameter_mm": 60.0,
            "height_mm": 20.0,
            "initial_mass_g": 110.0,
        }
    if base == "test-set":
        return {
            "project": side.project.pk,
            "reference": "DS-99",
            "method": "astm-d3080",
            "box_length_mm": 60.0,
            "box_width_mm": 60.0,
            "requested_on": "2026-11-12",
        }
    if base == "stage":
        return {
            "test": side.open_test.pk,
            "specimen": side.spare_specimen.pk,
            "stage_number": 1,
            "loading": "frame",
            "applied_normal_stress_kpa": 100.0,
            "force_unit": "N",
        }
    code = side.organisation.code
    if base == "apparatus":
        return {"reference": f"SB-new-{code}", "box_length_mm": 100.0, "box_width_mm": 100.0}
    if base == "force-device":
        return {"reference": f"PR-new-{code}", "kind": "ring", "capacity_n": 4500.0}
    if base == "calibration":
        return {
            "device": side.force_device.pk,
            "certificate_number": f"CAL-new-{code}",
            "issuing_lab": "Calibration lab",
            "calibrated_on": "2026-06-01",
            "due_on": "2027-06-01",
            "model": "linear",
            "coefficients": [1.0],
            "range_min": 0.0,
            "range_max": 5000.0,
        }
    if base == "gauge":
        return {
            "reference": f"DG-new-{code}",
            "kind": "lvdt",
            "axis": "vertical",
            "factor_mm_per_unit": 1.0,
        }
    if base == "report":
        return {"project": side.project.pk, "tests": [side.test.pk]}
    return {}  # a resource that offers no create


# Readings in the canonical layout for a load-cell stage, as JSON rows: two consolidation
# readings, then four shear readings.
CANONICAL_ROWS: list[dict[str, Any]] = [
    {"phase": "consolidation", "time_s": 0, "vertical_displacement_mm": 0.0},
    {"phase": "consolidation", "time_s": 600, "vertical_displacement_mm": -0.12},
    *(
        {
            "phase": "shear",
            "time_s": 30 * i,
            "horizontal_displacement_mm": 0.25 * i,
            "vertical_displacement_mm": 0.01 * i,
            "shear_force_n": 40.0 * i,
        }
        for i in range(4)
    ),
]


ACTION_BODIES: dict[str, dict[str, Any]] = {
    "api:sample-transition": {"to_status": "scheduled"},
    "api:test-set-recompute": {"reason": "checking the permission matrix"},
    "api:envelope-recompute": {"reason": "checking the permission matrix"},
    "api:stage-exclude": {"envelope_type": "peak", "reason": "checking the permission matrix"},
    "api:stage-include": {"envelope_type": "peak"},
    # Sign-offs ask for the password again: every persona's is tests.conftest.PASSWORD.
    "api:report-revision-check": {"password": PASSWORD},
    "api:report-revision-approve": {"password": PASSWORD},
    "api:report-revision-issue": {"password": PASSWORD},
    "api:report-revision-supersede": {"reason": "checking the permission matrix"},
    "api:stage-readings-upload": {"rows": CANONICAL_ROWS, "reason": "checking the matrix"},
}


def token_body(username: str | None) -> dict[str, str]:
    if username is None:
        return {"username": "nobody-at-all", "password": "wrong"}
    return {"username": username, "password": PASSWORD}


def call(client: APIClient, method: str, url: str, body: dict[str, Any] | None = None) -> Response:
    data = json.dumps(body) if body is not None else ""
    response: Response = client.generic(method, url, data=data, content_type="application/json")
    return response
