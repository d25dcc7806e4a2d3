"""Every staff page × every persona; the actions' permissions; query counts; CSP headers.

Expected answers (the access rules in DEVELOPERS.md): lab staff 200; client users 404 on staff
pages, exactly as for a page that does not exist; anonymous and deactivated users 302 to the
sign-in page; the dashboard is the lab manager's (other staff 403).
"""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.test import Client
from django.urls import reverse

from testing.models import SampleEvent, SampleStatus, StageExclusion
from testing.views.assets import plotly_version
from testing.views.common import optional_url
from tests.conftest import Cast, Records
from tests.web.conftest import ShearSet

STAFF = ("technician", "checker", "approver", "manager")
CLIENTS = ("client_a", "client_b")
NOBODY = ("anonymous", "deactivated")
PERSONAS = STAFF + CLIENTS + NOBODY


def _client_for(cast: Cast, persona: str) -> Client:
    client = Client()
    if persona != "anonymous":
        client.force_login(getattr(cast, persona))
    return client


def _stable(html: bytes) -> str:
    """The page without its per-response parts (CSP nonce, CSRF token)."""
    text = html.decode()
    text = re.sub(r'nonce="[^"]*"', 'nonce=""', text)
    return re.sub(r'name="csrfmiddlewaretoken" value="[^"]*"', "", text)


def _pages(shear: ShearSet, records: Records) -> dict[str, str]:
    stage = shear.stages[0]
    return {
        "worklist": reverse("worklist"),
        "projects": reverse("project-list"),
        "project": reverse("project-detail", args=[records.project.pk]),
        "borehole": reverse("borehole-detail", args=[records.borehole.pk]),
        "sample": reverse("sample-detail", args=[records.sample.pk]),
        "specimen": reverse("specimen-detail", args=[shear.specimens[0].pk]),
        "tests": reverse("test-list"),
        "test": reverse("test-detail", args=[shear.test.pk]),
        "runs": reverse("test-runs", args=[shear.test.pk]),
        "stage": reverse("stage-detail", args=[stage.pk]),
    }


def _expected(persona: str, page: str) -> int:
    if persona in NOBODY:
        return 302
    if persona in CLIENTS:
        return 404
    if page == "dashboard" and persona != "manager":
        return 403
    return 200


@pytest.mark.django_db
@pytest.mark.parametrize("persona", PERSONAS)
def test_every_staff_page_answers_each_persona_as_the_access_rules_say(
    persona: str, cast: Cast, records_a: Records, shear_set_a: ShearSet
) -> None:
    client = _client_for(cast, persona)
    pages = {**_pages(shear_set_a, records_a), "dashboard": reverse("dashboard")}
    answers = {name: client.get(url).status_code for name, url in pages.items()}
    assert answers == {name: _expected(persona, name) for name in pages}
    if persona in NOBODY:
        response = client.get(pages["test"])
        assert response["Location"].startswith(reverse("login") + "?next=")


@pytest.mark.django_db
def test_client_b_gets_the_same_404_for_client_a_records_as_for_missing_ones(
    cast: Cast, records_a: Records, shear_set_a: ShearSet
) -> None:
    client = _client_for(cast, "client_b")
    real = client.get(reverse("sample-detail", args=[records_a.sample.pk]))
    missing = client.get(reverse("sample-detail", args=[999_999]))
    assert real.status_code == missing.status_code == 404
    assert _stable(real.content) == _stable(missing.content)
    # Read without the random tokens: a 64-character CSRF token holds "U1" about once in 60 pages.
    page = _stable(real.content)
    assert records_a.sample.reference not in page and records_a.project.reference not in page


@pytest.mark.django_db
def test_staff_asking_for_a_record_that_does_not_exist_get_404(cast: Cast) -> None:
    client = _client_for(cast, "manager")
    for name in ("project-detail", "borehole-detail", "sample-detail", "specimen-detail"):
        assert client.get(reverse(name, args=[424242])).status_code == 404
    assert client.get(reverse("test-detail", args=[424242])).status_code == 404
    assert client.get(reverse("stage-detail", args=[424242])).status_code == 404


@pytest.mark.django_db
@pytest.mark.parametrize("persona", PERSONAS)
def test_home_page(persona: str, cast: Cast, records_a: Records) -> None:
    response = _client_for(cast, persona).get(reverse("home"))
    if persona in NOBODY:
        assert response.status_code == 302
    elif persona in CLIENTS and optional_url("portal:home"):
        assert response.status_code == 302
        assert response["Location"] == optional_url("portal:home")
    else:
        assert response.status_code == 200


@pytest.mark.django_db
def test_the_sign_in_page_and_plotly_bundle_are_served_to_anyone(client: Client) -> None:
    assert client.get(reverse("login")).status_code == 200
    bundle = client.get(reverse("plotly-js", args=[plotly_version()]))
    assert bundle.status_code == 200
    assert bundle["Content-Type"].startswith("text/javascript")
    body = b"".join(bundle.streaming_content)  # type: ignore[attr-defined]
    assert b"plotly" in body[:2000].lower()
    assert client.get(reverse("plotly-js", args=["0.0.0"])).status_code == 404


# --- Actions ---------------------------------------------------------------------------------------

ActionCall = Callable[[Client], Any]


@pytest.mark.django_db
@pytest.mark.parametrize("persona", CLIENTS + NOBODY)
def test_no_action_is_open_to_clients_or_signed_out_users(
    persona: str, cast: Cast, records_a: Records, shear_set_a: ShearSet
) -> None:
    client = _client_for(cast, persona)
    stage = shear_set_a.stages[0]
    posts = {
        reverse("sample-move", args=[records_a.sample.pk]): {"to_status": "scheduled"},
        reverse("test-recompute", args=[shear_set_a.test.pk]): {"reason": "x"},
        reverse("stage-exclude", args=[stage.pk]): {"envelope_type": "peak", "reason": "x"},
        reverse("stage-include", args=[stage.pk]): {"envelope_type": "peak"},
        reverse("stage-enter", args=[stage.pk]): {
            "shear-1-time_min": "0",
            "shear-1-horizontal_mm": "0",
            "shear-1-vertical_mm": "0",
            "shear-1-force": "0",
            "shear-2-time_min": "1",
            "shear-2-horizontal_mm": "1",
            "shear-2-vertical_mm": "0",
            "shear-2-force": "5",
        },
    }
    expected = 302 if persona in NOBODY else 404
    for url, data in posts.items():
        assert client.post(url, data).status_code == expected, url
    assert not SampleEvent.objects.filter(to_status=SampleStatus.SCHEDULED).exists()
    assert not StageExclusion.objects.exists()


@pytest.mark.django_db
def test_a_technician_moves_a_sample_and_the_event_is_recorded(
    cast: Cast, records_a: Records
) -> None:
    client = _client_for(cast, "technician")
    url = reverse("sample-move", args=[records_a.sample.pk])
    response = client.post(url, {"to_status": "scheduled", "note": ""})
    assert response.status_code == 302
    event = SampleEvent.objects.get(sample=records_a.sample, to_status="scheduled")
    assert event.by == cast.technician
    page = client.get(reverse("sample-detail", args=[records_a.sample.pk]))
    assert b"Scheduled" in page.content
    # A move the lifecycle does not allow from "scheduled" is refused by the form, not saved.
    refused = client.post(url, {"to_status": "reported"})
    assert refused.status_code == 400
    assert not SampleEvent.objects.filter(to_status="reported").exists()
    # Putting on hold needs a reason.
    no_reason = client.post(url, {"to_status": "on_hold", "note": " "})
    assert no_reason.status_code == 400
    assert b"Give a reason" in no_reason.content


@pytest.mark.django_db
def test_excluding_a_stage_needs_a_reason_refits_and_shows_on_the_page(
    cast: Cast, shear_set_a: ShearSet, django_capture_on_commit_callbacks: Any
) -> None:
    client = _client_for(cast, "checker")
    stage = shear_set_a.stages[2]
    url = reverse("stage-exclude", args=[stage.pk])
    client.post(url, {"envelope_type": "peak", "reason": ""})
    assert not StageExclusion.objects.exists()
    with django_capture_on_commit_callbacks(execute=True):
        response = client.post(url, {"envelope_type": "peak", "reason": "Specimen tilted in box"})
    assert response.status_code == 302
    page = client.get(reverse("test-detail", args=[shear_set_a.test.pk]))
    text = page.content.decode()
    assert "Specimen tilted in box" in text
    assert "Stages left out" in text  # the envelope chart marks the excluded point
    with django_capture_on_commit_callbacks(execute=True):
        client.post(reverse("stage-include", args=[stage.pk]), {"envelope_type": "peak"})
    assert not StageExclusion.objects.exists()


@pytest.mark.django_db
def test_approver_cannot_exclude_stages_and_is_told_why(cast: Cast, shear_set_a: ShearSet) -> None:
    client = _client_for(cast, "approver")
    url = reverse("stage-exclude", args=[shear_set_a.stages[0].pk])
    response = client.post(url, {"envelope_type": "peak", "reason": "x"}, follow=True)
    assert response.status_code == 200
    assert b"Only technicians, checkers and the lab manager" in response.content
    assert not StageExclusion.objects.exists()


@pytest.mark.django_db
def test_recompute_queues_runs_and_the_progress_endpoint_reports_them(
    cast: Cast, shear_set_a: ShearSet
) -> None:
    client = _client_for(cast, "manager")
    # Without executing on-commit callbacks the runs stay queued: the poll sees work to follow.
    client.post(reverse("test-recompute", args=[shear_set_a.test.pk]), {"reason": "check"})
    body = client.get(reverse("test-runs", args=[shear_set_a.test.pk])).json()
    assert body["busy"] is True
    assert {run["state"] for run in body["runs"]} >= {"queued"}
    page = client.get(reverse("test-detail", args=[shear_set_a.test.pk]))
    assert b'data-busy="1"' in page.content


# --- What the test-set page shows -------------------------------------------------------------------


@pytest.mark.django_db
def test_test_set_page_shows_results_with_units_charts_and_the_caution(
    cast: Cast, shear_set_a: ShearSet
) -> None:
    page = _client_for(cast, "technician").get(reverse("test-detail", args=[shear_set_a.test.pk]))
    text = page.content.decode()
    for needle in (
        "Normal stress σn (kPa)",
        "Failure τ (kPa)",
        "x at failure (mm)",
        "ψmax (°)",
        "Rate (mm/min)",
        "Cohesion intercept c′",
        "Friction angle φ′",
        "Results apply only to the specimens tested",
        "qualified",
        'id="chart-shear"',
        'id="chart-vertical"',
        'id="chart-env-peak"',
        'id="chart-cons-1"',
        "faster than the maximum permitted",  # the rate flag, in words
    ):
        assert needle in text, needle
    # The nonce on the page's scripts is the one in this response's header.
    nonce = re.search(r"'nonce-([^']+)'", page["Content-Security-Policy"]).group(1)  # type: ignore[union-attr]
    tags = re.findall(r"<(?:script|style)\b[^>]*>", text)
    executable = [t for t in tags if 'type="application/json"' not in t]
    assert executable  # the page's own script, Plotly, and the style hosts Plotly writes into
    assert all(f'nonce="{nonce}"' in tag for tag in executable), executable
    assert 'style="' not in text  # no inline style attributes in our markup


@pytest.mark.django_db
def test_every_page_carries_a_fresh_csp_nonce_and_the_security_headers(
    cast: Cast, records_a: Records
) -> None:
    client = _client_for(cast, "manager")
    first = client.get(reverse("worklist"))
    second = client.get(reverse("worklist"))
    policies = [first["Content-Security-Policy"], second["Content-Security-Policy"]]
    for policy in policies:
        assert "frame-ancestors 'none'" in policy
        assert "script-src 'self' 'nonce-" in policy
        assert "unsafe-inline" not in policy
    assert policies[0] != policies[1]
    assert first["X-Content-Type-Options"] == "nosniff"
    assert first["Referrer-Policy"] == "same-origin"


# --- Query counts ----------------------------------------------------------------------------------


def _user(cast: Cast, persona: str) -> User:
    user: User = getattr(cast, persona)
    return user


@pytest.mark.django_db
def test_worklist_query_count_does_not_grow_with_the_samples(
    cast: Cast, records_a: Records, records_b: Records, django_assert_num_queries: Any
) -> None:
    from tests.conftest import make_records

    client = _client_for(cast, "manager")
    # 1 session, 1 user with its lab profile (one join: the password backend loads both);
    # 3 sample columns (received, scheduled, in test), each one sliced query;
    # 3 test-set columns (awaiting check, approval, issue) when the reports app is installed, else 1.
    from testing.selectors_worklist import _reports_installed

    expected = 2 + 3 + (3 if _reports_installed() else 1)
    with django_assert_num_queries(expected):
        assert client.get(reverse("worklist")).status_code == 200
    for n in range(5):
        make_records(cast, cast.org_a, f"Q{n}")
    with django_assert_num_queries(expected):
        assert client.get(reverse("worklist")).status_code == 200


@pytest.mark.django_db
def test_test_set_page_query_count(
    cast: Cast, shear_set_a: ShearSet, django_assert_num_queries: Any
) -> None:
    client = _client_for(cast, "technician")
    n_stages = len(shear_set_a.stages)
    # 1 session, 1 user with its lab profile; 1 test set (access); 1 stages with specimen, sample
    # and borehole; 1 exclusions (prefetch, with who); 1 latest stage results; 1 latest envelopes;
    # 1 recent runs; then per stage 2 (shear and consolidation readings for the curves).
    expected = 2 + 1 + 1 + 1 + 1 + 1 + 1 + 2 * n_stages
    with django_assert_num_queries(expected):
        assert client.get(reverse("test-detail", args=[shear_set_a.test.pk])).status_code == 200
