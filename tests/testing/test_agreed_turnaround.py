"""A project's agreed turnaround: samples received on it fall due that many days after receipt
(else after the lab's default), the API takes and returns it, and the dashboard's overdue table
names the agreement each overdue sample is measured against."""

from __future__ import annotations

import re
from datetime import date, timedelta
from decimal import Decimal
from io import StringIO
from typing import Any

import pytest
from django.core.exceptions import ValidationError
from django.core.management import call_command
from django.db import IntegrityError, connection, transaction
from django.test import Client
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from django.utils import timezone

from testing.models import Borehole, Project, Sample, SampleType
from testing.selectors_dashboard import dashboard_for_user
from testing.services.records import project_create, sample_receive
from tests.api.conftest import token_client
from tests.conftest import Cast

pytestmark = pytest.mark.django_db

# A lab default other than the shipped one, so that a hard-coded default would show.
DEFAULT_DAYS = 12


@pytest.fixture(autouse=True)
def _lab_default(settings: Any) -> None:
    settings.TAULINE_DEFAULT_TURNAROUND_DAYS = DEFAULT_DAYS
    settings.TAULINE_DASHBOARD_CACHE_SECONDS = 0  # the page computes its figures afresh


def _project(cast: Cast, reference: str, agreed: int | None) -> Project:
    return project_create(
        user=cast.manager,
        organisation=cast.org_a,
        reference=reference,
        name=f"Site {reference}",
        agreed_turnaround_days=agreed,
    )


def _receive(cast: Cast, project: Project, ref: str, received: date, **kw: Any) -> Sample:
    borehole, _ = Borehole.objects.get_or_create(project=project, reference="BH01")
    return sample_receive(
        user=cast.technician,
        borehole=Borehole.objects.get(pk=borehole.pk),  # the project not cached on it
        reference=ref,
        depth_top_m=Decimal("1.00"),
        depth_base_m=Decimal("1.45"),
        sample_type=SampleType.UNDISTURBED,
        received_on=received,
        **kw,
    )


def test_a_sample_is_due_the_agreed_days_after_receipt_else_the_lab_default(cast: Cast) -> None:
    received = date(2026, 11, 2)
    agreed = _receive(cast, _project(cast, "AT-10", 10), "U1", received)
    assert agreed.due_on == received + timedelta(days=10)
    default = _receive(cast, _project(cast, "AT-NONE", None), "U1", received)
    assert default.due_on == received + timedelta(days=DEFAULT_DAYS)
    assert Sample.objects.get(pk=agreed.pk).due_on == agreed.due_on  # as stored


def test_an_explicit_due_date_wins_over_the_agreement(cast: Cast) -> None:
    explicit = date(2026, 11, 30)
    sample = _receive(cast, _project(cast, "AT-10", 10), "U1", date(2026, 11, 2), due_on=explicit)
    assert sample.due_on == explicit


def test_the_agreement_is_at_least_one_day(cast: Cast) -> None:
    with pytest.raises(ValidationError) as caught:
        _project(cast, "AT-0", 0)
    assert "agreed_turnaround_days" in caught.value.message_dict
    assert not Project.objects.filter(reference="AT-0").exists()
    # The database refuses it too, past the services.
    with pytest.raises(IntegrityError), transaction.atomic():
        Project.objects.create(
            organisation=cast.org_a, reference="AT-0", name="x", agreed_turnaround_days=0
        )


def test_the_api_accepts_returns_and_checks_the_agreement(cast: Cast) -> None:
    client = token_client(cast.manager)
    url = reverse("api:project-list")
    body = {"organisation": cast.org_a.pk, "reference": "API-1", "name": "API site"}

    created = client.post(url, {**body, "agreed_turnaround_days": 10}, format="json")
    assert created.status_code == 201, created.content
    assert created.json()["agreed_turnaround_days"] == 10
    assert Project.objects.get(reference="API-1").agreed_turnaround_days == 10
    shown = client.get(reverse("api:project-detail", args=[created.json()["id"]]))
    assert shown.json()["agreed_turnaround_days"] == 10

    without = client.post(url, {**body, "reference": "API-2"}, format="json")
    assert without.status_code == 201, without.content
    assert without.json()["agreed_turnaround_days"] is None

    for bad in (0, -3):
        refused = client.post(
            url, {**body, "reference": "API-3", "agreed_turnaround_days": bad}, format="json"
        )
        assert refused.status_code == 400, refused.content
        assert "agreed_turnaround_days" in refused.content.decode()
    assert not Project.objects.filter(reference="API-3").exists()


def _overdue_world(cast: Cast) -> tuple[Project, Project, date]:
    today = timezone.localdate()
    agreed, default = _project(cast, "AT-10", 10), _project(cast, "AT-NONE", None)
    _receive(cast, agreed, "U1", today - timedelta(days=30))
    _receive(cast, default, "U1", today - timedelta(days=40))
    _receive(cast, default, "U2", today)  # open, not overdue
    return agreed, default, today


def test_the_dashboard_names_each_overdue_samples_project_and_agreement(cast: Cast) -> None:
    agreed, default, today = _overdue_world(cast)
    d = dashboard_for_user(user=cast.manager, today=today)
    rows = {(s.project_id, s.project_reference): s for s in d.overdue_samples}
    assert set(rows) == {(agreed.pk, "AT-10"), (default.pk, "AT-NONE")}
    assert rows[(agreed.pk, "AT-10")].agreed_turnaround_days == 10
    assert rows[(agreed.pk, "AT-10")].turnaround_days == 10
    assert rows[(agreed.pk, "AT-10")].days_overdue == 30 - 10
    assert rows[(default.pk, "AT-NONE")].agreed_turnaround_days is None
    assert rows[(default.pk, "AT-NONE")].turnaround_days == DEFAULT_DAYS
    assert rows[(default.pk, "AT-NONE")].project_name == "Site AT-NONE"

    client = Client()
    client.force_login(cast.manager)
    html = client.get(reverse("dashboard")).content.decode()
    table = html.split("Samples furthest past their due date", 1)[1].split("</table>", 1)[0]
    assert "Agreed turnaround (days)" in table
    body_rows = re.findall(r"<tr>(.*?)</tr>", table.split("<tbody>", 1)[1], re.S)
    by_project = {
        ref: row for row in body_rows for ref in ("AT-10", "AT-NONE") if f">{ref}</a>" in row
    }
    assert set(by_project) == {"AT-10", "AT-NONE"}
    assert reverse("project-detail", args=[agreed.pk]) in by_project["AT-10"]
    assert '<td class="num">10</td>' in by_project["AT-10"]
    assert f"lab default {DEFAULT_DAYS}" in by_project["AT-NONE"]


def test_the_overdue_table_costs_no_query_per_row(
    cast: Cast, django_assert_num_queries: Any
) -> None:
    today = timezone.localdate()
    _overdue_world(cast)
    with CaptureQueriesContext(connection) as few:
        small = dashboard_for_user(user=cast.manager, today=today)
    for n in range(4):
        project = _project(cast, f"AT-MORE-{n}", 5 + n)
        _receive(cast, project, "U1", today - timedelta(days=20 + n))
    with django_assert_num_queries(len(few.captured_queries)):
        large = dashboard_for_user(user=cast.manager, today=today)
    assert len(large.overdue_samples) == len(small.overdue_samples) + 4


def test_the_project_page_shows_the_agreement_or_the_lab_default(cast: Cast) -> None:
    agreed, default = _project(cast, "AT-10", 10), _project(cast, "AT-NONE", None)
    client = Client()
    client.force_login(cast.manager)
    page = client.get(reverse("project-detail", args=[agreed.pk])).content.decode()
    assert "<dt>Agreed turnaround</dt><dd>10 days</dd>" in page
    page = client.get(reverse("project-detail", args=[default.pk])).content.decode()
    assert f"the lab default, {DEFAULT_DAYS} days" in page


def test_demo_project_samples_fall_due_after_the_agreed_21_days() -> None:
    call_command("loaddemo", stdout=StringIO())
    demo = Project.objects.get(reference="TL-2026-014")
    assert demo.agreed_turnaround_days == 21
    samples = list(Sample.objects.filter(borehole__project=demo))
    assert samples
    assert all(s.due_on == s.received_on + timedelta(days=21) for s in samples)
    other = Sample.objects.filter(borehole__project__reference="TL-2026-019")
    assert other.exists()
    assert all(s.due_on == s.received_on + timedelta(days=DEFAULT_DAYS) for s in other)
