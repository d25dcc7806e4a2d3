"""The dashboard cache: shared figures, recomputed at once when a sample moves or is edited.

Checked against the uncached :func:`dashboard_for_user` (the figures must be equal) and against
the lifecycle change just made (the backlog count of the new state goes up by one).
"""

from __future__ import annotations

from datetime import timedelta
from typing import Any

import pytest
from django.core.cache import cache
from django.db import connection
from django.test import Client
from django.test.utils import CaptureQueriesContext

from testing.selectors_dashboard import dashboard_cached, dashboard_for_user
from testing.services.lifecycle import sample_transition
from tests.conftest import Cast, Records

pytestmark = pytest.mark.django_db


@pytest.fixture
def cached(settings: Any) -> None:
    settings.TAULINE_DASHBOARD_CACHE_SECONDS = 60
    cache.clear()


def backlog(d: object) -> dict[str, int]:
    return {row.status: row.count for row in d.backlog}  # type: ignore[attr-defined]


@pytest.mark.usefixtures("cached")
def test_second_request_is_served_from_the_cache(cast: Cast, records_a: Records) -> None:
    first = dashboard_cached(user=cast.manager)
    with CaptureQueriesContext(connection) as ctx:
        second = dashboard_cached(user=cast.manager)
    assert second.as_of == first.as_of  # the same computed figures
    assert len(ctx.captured_queries) <= 2  # the two "newest id" look-ups only
    fresh = dashboard_for_user(user=cast.manager)
    assert backlog(second) == backlog(fresh)
    assert second.weeks == fresh.weeks


@pytest.mark.usefixtures("cached")
def test_a_lifecycle_move_shows_at_once(cast: Cast, records_a: Records) -> None:
    before = backlog(dashboard_cached(user=cast.manager))
    sample_transition(sample=records_a.sample, to_status="scheduled", user=cast.technician)
    after = backlog(dashboard_cached(user=cast.manager))
    assert after["scheduled"] == before["scheduled"] + 1
    assert after["received"] == before["received"] - 1


@pytest.mark.usefixtures("cached")
def test_an_edited_due_date_shows_at_once(cast: Cast, records_a: Records) -> None:
    sample = records_a.sample
    before = dashboard_cached(user=cast.manager)
    assert before.overdue_total == 1  # the fixture's sample is open and past its due date
    sample.due_on = before.today + timedelta(days=30)
    sample.save()  # an edit: a history row, no lifecycle event
    after = dashboard_cached(user=cast.manager)
    assert after.overdue_total == 0


@pytest.mark.usefixtures("cached")
def test_clients_never_get_the_shared_figures(cast: Cast, records_a: Records) -> None:
    dashboard_cached(user=cast.manager)
    assert backlog(dashboard_cached(user=cast.client_a)) == backlog(
        dashboard_for_user(user=cast.client_a)
    )
    assert sum(backlog(dashboard_cached(user=cast.client_a)).values()) == 0


@pytest.mark.usefixtures("cached")
def test_the_page_says_when_the_figures_were_computed(cast: Cast, records_a: Records) -> None:
    client = Client()
    client.force_login(cast.manager)
    response = client.get("/dashboard/")
    assert response.status_code == 200
    assert b"figures as of " in response.content
