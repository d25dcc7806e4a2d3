"""The client portal pages: who may open each, what a client sees, and that the strength summary
is the issued report's frozen values."""

from __future__ import annotations

import math
import re
import uuid
from collections.abc import Callable
from datetime import date
from decimal import Decimal
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.db import connection
from django.test import Client
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from scipy import stats

from reports import services
from reports.models import ReportRevision
from testing.models import DirectShearTest, SampleType
from testing.services.records import sample_receive
from testing.views.common import CAUTION
from tests.conftest import PASSWORD, Cast, Records
from tests.reports.conftest import issue

STAFF = ("technician", "checker", "approver", "manager")


def _client(user: User | None) -> Client:
    c = Client()
    if user is not None:
        c.force_login(user)
    return c


def _normalised(body: bytes) -> bytes:
    """Per-response values (CSP nonce, CSRF token) differ on every response, so blank them."""
    body = re.sub(rb'nonce="[^"]*"', b'nonce=""', body)
    return re.sub(rb'name="csrfmiddlewaretoken" value="[^"]*"', b"", body)


def _pages(issued: ReportRevision, test: DirectShearTest) -> dict[str, str]:
    return {
        "home": reverse("portal:home"),
        "project": reverse("portal:project", args=[test.project_id]),
        "test": reverse("portal:test", args=[test.pk]),
        "revision-test": reverse("portal:revision-test", args=[issued.public_id, test.pk]),
        "revision": reverse("portal:revision", args=[issued.public_id]),
        "pdf": reverse("portal:pdf", args=[issued.public_id]),
        "verify": reverse("portal:verify", args=[issued.public_id]),
    }


def _supersede(cast: Cast, revision: ReportRevision, capture: Callable[..., Any]) -> ReportRevision:
    new = services.revision_supersede(user=cast.technician, revision=revision, reason="Remarks")
    services.revision_update(user=cast.technician, revision=new, remarks="Corrected remarks.")
    services.revision_check(user=cast.checker, revision=new, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=new, password=PASSWORD)
    return issue(new, cast.approver, capture)


# --- Who may open what --------------------------------------------------------------------------


def test_every_portal_page_for_every_persona(
    cast: Cast, issued: ReportRevision, computed_set: DirectShearTest
) -> None:
    """Client A and lab staff open every page; client B gets 404 on A's records (home: 200 but
    nothing of A's); anonymous and deactivated users are sent to sign in. (Access rules of
    DEVELOPERS.md, rule 5.)"""
    pages = _pages(issued, computed_set)
    for name, url in pages.items():
        for user in (None, cast.deactivated):
            response = _client(user).get(url)
            assert response.status_code == 302, (name, user)
            assert response["Location"].startswith(reverse("login")), name
        assert _client(cast.client_a).get(url).status_code == 200, name
        for persona in STAFF:
            assert _client(getattr(cast, persona)).get(url).status_code == 200, (name, persona)
        theirs = _client(cast.client_b).get(url)
        if name == "home":
            assert theirs.status_code == 200
            body = theirs.content.decode()
            assert issued.label not in body and computed_set.project.reference not in body
        else:
            assert theirs.status_code == 404, name


def test_client_b_gets_the_same_404_as_a_missing_project_or_test(
    cast: Cast, issued: ReportRevision, computed_set: DirectShearTest
) -> None:
    b = _client(cast.client_b)
    missing = 10**6
    for name, own_id in (
        ("portal:project", computed_set.project_id),
        ("portal:test", computed_set.pk),
    ):
        theirs = b.get(reverse(name, args=[own_id]))
        absent = b.get(reverse(name, args=[missing]))
        assert theirs.status_code == absent.status_code == 404
        assert _normalised(theirs.content) == _normalised(absent.content)
    other = b.get(reverse("portal:revision-test", args=[uuid.uuid4(), computed_set.pk]))
    assert other.status_code == 404


def test_a_user_without_a_profile_sees_an_empty_portal(
    cast: Cast, issued: ReportRevision, computed_set: DirectShearTest
) -> None:
    nobody = User.objects.create_user("no-profile", password=PASSWORD)
    c = _client(nobody)
    home = c.get(reverse("portal:home")).content.decode()
    assert "No projects yet" in home and "No issued reports yet" in home
    assert c.get(reverse("portal:project", args=[computed_set.project_id])).status_code == 404
    assert c.get(reverse("portal:test", args=[computed_set.pk])).status_code == 404


# --- Work in progress shows no results ----------------------------------------------------------


def test_in_progress_work_shows_its_state_and_no_results(
    cast: Cast, records_a: Records, draft: ReportRevision, computed_set: DirectShearTest
) -> None:
    """A computed set whose report is only a draft: the client sees the sample's state, no link to
    results, no result values, and the test page answers 404."""
    a = _client(cast.client_a)
    page = a.get(reverse("portal:project", args=[records_a.project.pk])).content.decode()
    assert records_a.sample.reference in page
    assert "Received" in page and "step 1 of 5" in page
    assert "No results yet" in page
    assert reverse("portal:test", args=[computed_set.pk]) not in page
    assert computed_set.reference not in page
    envelope = computed_set.envelopes.get(envelope_type="peak")
    assert f"{envelope.cohesion_kpa:.1f} ± " not in page
    assert a.get(reverse("portal:test", args=[computed_set.pk])).status_code == 404
    home = a.get(reverse("portal:home")).content.decode()
    assert draft.label not in home
    assert "0 of 1 (0 %)" in home  # the one sample, not yet reported


def test_released_set_is_linked_from_the_project_page(
    cast: Cast, records_a: Records, issued: ReportRevision, computed_set: DirectShearTest
) -> None:
    page = _client(cast.client_a).get(reverse("portal:project", args=[records_a.project.pk]))
    assert reverse("portal:test", args=[computed_set.pk]) in page.content.decode()


# --- The strength summary is the frozen issued values --------------------------------------------


def _cell_numbers(body: str, row_label: str) -> list[float]:
    row = re.search(rf"<th scope=\"row\">{re.escape(row_label)}.*?</tr>", body, re.S)
    assert row is not None, row_label
    return [float(v) for v in re.findall(r"-?\d+\.\d+", row.group(0))]


def test_strength_summary_equals_an_independent_fit_of_the_frozen_stage_results(
    cast: Cast, issued: ReportRevision, computed_set: DirectShearTest
) -> None:
    """c′, φ′, their standard errors and n on the page equal an ordinary least-squares fit of the
    frozen peak stage results, done here with scipy.stats.linregress (slope = tanφ′, intercept =
    c′, stderr and intercept_stderr); SE(φ′) = SE(tanφ′)/(1 + tan²φ′) by the delta method
    (common practice, first-order error propagation)."""
    item = issued.content["tests"][0]
    sigma = [s["failure"]["normal_stress_kpa"] for s in item["stages"]]
    tau = [s["failure"]["shear_stress_kpa"] for s in item["stages"]]
    fit = stats.linregress(sigma, tau)
    phi_deg = math.degrees(math.atan(fit.slope))
    se_phi_deg = math.degrees(fit.stderr / (1.0 + fit.slope**2))

    body = _client(cast.client_a).get(reverse("portal:test", args=[computed_set.pk]))
    assert body.status_code == 200
    text = body.content.decode()
    c, se_c, phi, se_phi = _cell_numbers(text, "Peak")[:4]
    assert c == pytest.approx(round(fit.intercept, 1), abs=0.051)
    assert se_c == pytest.approx(round(fit.intercept_stderr, 2), abs=0.0051)
    assert phi == pytest.approx(round(phi_deg, 1), abs=0.051)
    assert se_phi == pytest.approx(round(se_phi_deg, 2), abs=0.0051)
    n_cell = re.search(r"<th scope=\"row\">Peak.*?<td class=\"num count\">(\d+)</td>", text, re.S)
    assert n_cell is not None and int(n_cell.group(1)) == len(sigma) == 3
    assert f"{min(sigma):.0f}–{max(sigma):.0f} kPa" in text
    # Each stage's frozen failure stresses, as printed.
    for s, t in zip(sigma, tau, strict=True):
        assert f"{s:.1f} kPa" in text and f"{t:.1f} kPa" in text


def test_superseded_revision_is_marked_and_links_to_the_current_one(
    cast: Cast,
    issued: ReportRevision,
    computed_set: DirectShearTest,
    django_capture_on_commit_callbacks: Callable[..., Any],
) -> None:
    new = _supersede(cast, issued, django_capture_on_commit_callbacks)
    a = _client(cast.client_a)
    old_page = a.get(reverse("portal:revision-test", args=[issued.public_id, computed_set.pk]))
    body = old_page.content.decode()
    assert "Superseded." in body
    assert reverse("portal:revision-test", args=[new.public_id, computed_set.pk]) in body
    home = a.get(reverse("portal:home")).content.decode()
    assert "Superseded" in home and "Current" in home
    assert f'Use <a href="{reverse("portal:revision", args=[new.public_id])}">' in home
    current = a.get(reverse("portal:test", args=[computed_set.pk])).content.decode()
    assert new.label in current and "Superseded." not in current


def test_withdrawn_report_shows_no_results(
    cast: Cast, issued: ReportRevision, computed_set: DirectShearTest
) -> None:
    services.revision_withdraw(user=cast.manager, revision=issued, reason="Wrong sample.")
    a = _client(cast.client_a)
    page = a.get(reverse("portal:test", args=[computed_set.pk])).content.decode()
    assert "No current report." in page
    assert "Stage results" not in page
    old = a.get(reverse("portal:revision-test", args=[issued.public_id, computed_set.pk]))
    assert "Withdrawn." in old.content.decode() and "Stage results" not in old.content.decode()
    home = a.get(reverse("portal:home")).content.decode()
    assert "Withdrawn" in home and "Wrong sample." in home


# --- Units, cautions, file check ----------------------------------------------------------------


def test_every_number_on_the_strength_page_carries_a_unit_and_the_caution_is_shown(
    cast: Cast, issued: ReportRevision, computed_set: DirectShearTest
) -> None:
    text = (
        _client(cast.client_a).get(reverse("portal:test", args=[computed_set.pk])).content.decode()
    )
    cells = re.findall(r'<td class="num">(.*?)</td>', text, re.S)
    assert cells
    unitless = []
    for cell in cells:
        value = " ".join(cell.split())
        if not re.search(r"(kPa|°|mm|mm/min|%|Mg/m³)\s*$", value) and value != "—":
            unitless.append(value)
    assert unitless == []
    # The only cells without a unit are the dimensionless ones: n (a count) and R² (a ratio).
    assert re.findall(r'<td class="num (\w+)">', text) == ["count", "ratio"] * len(
        re.findall(r'<td class="num count">', text)
    )
    for header in ("σn (kPa)", "τ at failure (kPa)", "x at failure (mm)", "c′ (kPa)", "φ′ (°)"):
        assert header in text
    assert CAUTION in text
    assert 'data-chart="chart-envelope"' in text and 'data-chart="chart-shear"' in text
    assert "95 % band of the line" in text  # the envelope figure carries its confidence band


def test_home_and_revision_show_the_signed_pdf_check_and_the_caution(
    cast: Cast, issued: ReportRevision
) -> None:
    a = _client(cast.client_a)
    for url in (reverse("portal:home"), reverse("portal:revision", args=[issued.public_id])):
        body = a.get(url).content.decode()
        assert "Signature intact" in body, url
        assert CAUTION in body, url


# --- Query count ----------------------------------------------------------------------------------


def test_project_page_query_count_does_not_grow_with_samples(
    cast: Cast, records_a: Records, issued: ReportRevision
) -> None:
    a = _client(cast.client_a)
    url = reverse("portal:project", args=[records_a.project.pk])
    a.get(url)  # warm: as in a running server

    def count() -> int:
        with CaptureQueriesContext(connection) as ctx:
            assert a.get(url).status_code == 200
        return len(ctx.captured_queries)

    # 1 session, 2 user with its lab profile (one join), 3 the project (access-scoped get),
    # 4 boreholes, 5 their samples (prefetch), 6 released stages → test sets per sample.
    assert count() == 6
    for i in range(5):
        sample_receive(
            user=cast.technician,
            borehole=records_a.borehole,
            reference=f"D{i}",
            depth_top_m=Decimal("2.00") + i,
            depth_base_m=Decimal("2.40") + i,
            sample_type=SampleType.SMALL_DISTURBED,
            received_on=date(2026, 11, 4),
        )
    assert count() == 6
