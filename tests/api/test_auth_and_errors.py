"""Tokens (issue, use, revoke, expiry, throttling) and the one error body."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from django.urls import reverse
from django.utils import timezone
from knox.models import AuthToken
from rest_framework.test import APIClient

from tests.api.conftest import World, token_client
from tests.conftest import PASSWORD, Cast

TOKEN_URL = "/api/v1/auth/token/"


@pytest.mark.django_db
def test_a_token_is_issued_stored_hashed_used_and_revoked(cast: Cast) -> None:
    client = APIClient()
    response = client.post(TOKEN_URL, {"username": "client-a", "password": PASSWORD}, format="json")
    assert response.status_code == 200
    body = response.json()
    assert set(body) == {"token", "expiry"}
    token = body["token"]
    stored = AuthToken.objects.get(user=cast.client_a)
    assert token not in (stored.digest, stored.token_key)  # only a digest and a short prefix
    assert len(stored.digest) == 128  # sha512 hex

    client.credentials(HTTP_AUTHORIZATION=f"Token {token}")
    assert client.get("/api/v1/projects/").status_code == 200
    assert client.post("/api/v1/auth/logout/").status_code == 204
    assert client.get("/api/v1/projects/").status_code == 401
    assert not AuthToken.objects.filter(user=cast.client_a).exists()


@pytest.mark.django_db
def test_wrong_password_unknown_user_and_deactivated_account_get_one_answer(cast: Cast) -> None:
    client = APIClient()
    answers = [
        client.post(TOKEN_URL, body, format="json").json()
        for body in (
            {"username": "client-a", "password": "not-the-password"},
            {"username": "nobody-by-that-name", "password": PASSWORD},
            {"username": "former", "password": PASSWORD},
        )
    ]
    assert answers[0] == answers[1] == answers[2]
    assert answers[0]["detail"] == "Unable to sign in with that username and password."
    assert not AuthToken.objects.exists()


@pytest.mark.django_db
def test_an_expired_token_is_refused(cast: Cast) -> None:
    instance, token = AuthToken.objects.create(user=cast.technician, expiry=timedelta(hours=1))
    client = APIClient()
    client.credentials(HTTP_AUTHORIZATION=f"Token {token}")
    assert client.get("/api/v1/projects/").status_code == 200
    AuthToken.objects.filter(pk=instance.pk).update(expiry=timezone.now() - timedelta(seconds=1))
    assert client.get("/api/v1/projects/").status_code == 401


@pytest.mark.django_db
def test_token_requests_are_throttled_per_username(cast: Cast, settings: Any) -> None:
    settings.TAULINE_API_THROTTLE_RATES = {
        **settings.TAULINE_API_THROTTLE_RATES,
        "token": "3/minute",
    }
    statuses = [
        APIClient(REMOTE_ADDR=f"10.0.0.{i}")
        .post(TOKEN_URL, {"username": "client-a", "password": "guess"}, format="json")
        .status_code
        for i in range(5)
    ]
    assert statuses == [400, 400, 400, 429, 429]


@pytest.mark.django_db
def test_api_requests_are_throttled_per_user(plain_world: World, settings: Any) -> None:
    settings.TAULINE_API_THROTTLE_RATES = {
        **settings.TAULINE_API_THROTTLE_RATES,
        "user": "4/minute",
    }
    first, second = token_client(plain_world.cast.client_a), token_client(plain_world.cast.client_a)
    statuses = [
        c.get("/api/v1/projects/").status_code for c in (first, second, first, second, first)
    ]
    assert statuses == [200, 200, 200, 200, 429]  # two tokens, one user, one allowance
    assert token_client(plain_world.cast.client_b).get("/api/v1/projects/").status_code == 200


@pytest.mark.django_db
def test_field_errors_service_refusals_and_role_refusals_share_one_body(plain_world: World) -> None:
    technician = token_client(plain_world.cast.technician)
    bad = technician.post(
        "/api/v1/samples/",
        {"borehole": plain_world.a.borehole.pk, "reference": "", "depth_top_m": "x"},
        format="json",
    ).json()
    assert bad["detail"] == "Some fields are not valid; see errors."
    assert {"reference", "depth_top_m", "depth_base_m", "sample_type"} <= set(bad["errors"])

    # A service refusal: the lifecycle rules, worded for the user, as a 400.
    url = reverse("api:sample-transition", args=[plain_world.a.sample.pk])
    refused = technician.post(url, {"to_status": "reported"}, format="json")
    assert refused.status_code == 400
    assert refused.json()["detail"].startswith("Sample U1 is received; it cannot move to reported.")
    assert refused.json()["errors"] == {}

    # A role refusal from a service (a checker may not log samples in) is a 403.
    checker = token_client(plain_world.cast.checker)
    body = {
        "borehole": plain_world.a.borehole.pk,
        "reference": "U7",
        "depth_top_m": "1.00",
        "depth_base_m": "1.20",
        "sample_type": "B",
    }
    denied = checker.post("/api/v1/samples/", body, format="json")
    assert denied.status_code == 403
    assert denied.json() == {
        "detail": "Only technicians and the lab manager can create lab records.",
        "errors": {},
    }


@pytest.mark.django_db
def test_protected_fields_cannot_be_written_and_the_state_moves_only_by_transition(
    plain_world: World,
) -> None:
    technician = token_client(plain_world.cast.technician)
    created = technician.post(
        "/api/v1/samples/",
        {
            "borehole": plain_world.a.borehole.pk,
            "reference": "U8",
            "depth_top_m": "2.00",
            "depth_base_m": "2.40",
            "sample_type": "U",
            "status": "reported",
            "status_changed_at": "2020-01-01T00:00:00Z",
        },
        format="json",
    )
    assert created.status_code == 201, created.content
    assert created.json()["status"] == "received"
    test_set = technician.post(
        "/api/v1/test-sets/",
        {
            "project": plain_world.a.project.pk,
            "reference": "DS-77",
            "method": "iso-17892-10",
            "box_length_mm": 100.0,
            "box_width_mm": 100.0,
            "requested_on": "2026-11-20",
            "released_at": "2026-11-21T00:00:00Z",
            "created_by": plain_world.cast.manager.pk,
        },
        format="json",
    ).json()
    assert test_set["released_at"] is None
    # A stage cannot be attached to a reported (released) set: it is not offered as a choice.
    stage = technician.post(
        "/api/v1/stages/",
        {
            "test": plain_world.a.test.pk,
            "specimen": plain_world.a.spare_specimen.pk,
            "stage_number": 2,
            "loading": "frame",
            "applied_normal_stress_kpa": 100.0,
        },
        format="json",
    )
    assert stage.status_code == 400
    assert "test" in stage.json()["errors"]


@pytest.mark.django_db
def test_schema_is_json_on_request_and_the_docs_page_needs_no_other_site(cast: Cast) -> None:
    client = APIClient()
    schema = client.get("/api/schema/", {"format": "json"})
    assert schema.status_code == 200
    assert schema.json()["openapi"].startswith("3.")
    docs = client.get("/api/docs/")
    assert docs.status_code == 200
    html = docs.content.decode()
    assert "swagger-ui" in html
    assert "http://" not in html and "https://" not in html  # no CDN: bundled assets only
