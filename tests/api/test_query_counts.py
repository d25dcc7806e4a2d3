"""Every list endpoint runs a fixed number of queries, whether it shows 2 records or 20."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from django.contrib.auth.models import User
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.urls import reverse
from django.utils import timezone
from rest_framework.test import APIClient

from reports.models import ReportRevision, RevisionState
from reports.services import report_create, revision_approve, revision_check
from testing.models import Organisation, SampleStatus
from testing.selectors_readings import ShearColumns, shear_reading_count
from testing.services.lifecycle import sample_transition
from testing.services.readings_store import write_shear_columns
from tests.api.conftest import OrgWorld, org_world
from tests.conftest import PASSWORD, Cast, make_records

# Queries common to every list: (1) the caller's lab profile (permission check) — tokens and
# sessions are bypassed here with force_authenticate, so authentication adds none.
PROFILE = 1
# A paginated list adds (2) COUNT(*) for the page count and (3) the page's SELECT, which joins the
# related rows it shows (select_related), so it does not grow with the number of rows.
PAGE = 2

EXPECTED = {
    # staff-only list: no scoping join needed
    "api:organisation-list": PROFILE + PAGE,
    # projects: COUNT + SELECT joined to organisation with the sample count annotated
    "api:project-list": PROFILE + PAGE,
    # boreholes: COUNT + SELECT joined to project
    "api:borehole-list": PROFILE + PAGE,
    # samples: COUNT + SELECT joined to borehole and project
    "api:sample-list": PROFILE + PAGE,
    "api:specimen-list": PROFILE + PAGE,
    # test sets: COUNT + SELECT with the stage count annotated
    "api:test-set-list": PROFILE + PAGE,
    "api:stage-list": PROFILE + PAGE,
    "api:computation-run-list": PROFILE + PAGE,
    # stage results: COUNT + SELECT joined to stage, test set and specimen
    "api:stage-result-list": PROFILE + PAGE,
    # envelopes: COUNT + SELECT joined to test set
    "api:envelope-list": PROFILE + PAGE,
    # throughput: one aggregate query, no pagination
    "api:throughput-list": PROFILE + 1,
    # report revisions: COUNT + SELECT joined to report, project, organisation and the revision
    # each replaces (the serializer shows the report number, project reference and replaced id)
    "api:report-revision-list": PROFILE + PAGE,
    # reports: COUNT + SELECT joined to project and organisation, then one prefetch each for
    # the test sets (many-to-many) and the revisions
    "api:report-list": PROFILE + PAGE + 2,
    # the equipment register: COUNT + SELECT; calibrations joined to their device
    "api:apparatus-list": PROFILE + PAGE,
    "api:force-device-list": PROFILE + PAGE,
    "api:calibration-list": PROFILE + PAGE,
    "api:gauge-list": PROFILE + PAGE,
}
# Sub-lists of one record: (2) the record itself through the scoped queryset, then COUNT + page.
NESTED = {
    # shear readings are paged out of column blocks: the block index (the count) and the blocks
    # holding the page, one query each however many readings there are
    "api:stage-readings": PROFILE + 1 + PAGE,
    "api:stage-consolidation-readings": PROFILE + 1 + PAGE,
    # events: the sample, then COUNT + SELECT joined to the user who moved it
    "api:sample-events": PROFILE + 1 + PAGE,
}
STAFF_ONLY = {
    "api:organisation-list",
    "api:computation-run-list",
    "api:report-list",
    "api:apparatus-list",
    "api:force-device-list",
    "api:calibration-list",
    "api:gauge-list",
}


def _grow(cast: Cast, worlds: list[OrgWorld], n: int) -> None:
    """Add record trees for client A (with their equipment, and organisations) until there are
    ``n`` of each, each with a report of its test set."""
    while len(worlds) < n:
        index = len(worlds)
        Organisation.objects.create(name=f"Extra client {index}", code=f"extra-{index}")
        world = org_world(cast, make_records(cast, cast.org_a, f"Q{index}"), f"Q{index}")
        revision = report_create(user=cast.technician, project=world.project, tests=[world.test])
        revision = revision_check(user=cast.checker, revision=revision, password=PASSWORD)
        revision = revision_approve(user=cast.approver, revision=revision, password=PASSWORD)
        # Issued directly (a fixture: issuing renders and signs a PDF, seconds each; no file is
        # read here), so the client's list, which shows only issued revisions, grows too.
        ReportRevision.objects.filter(pk=revision.pk).update(
            state=RevisionState.ISSUED,
            issued_by=cast.approver,
            issued_at=timezone.now(),
            pdf=f"reports/fixture-{revision.pk}.pdf",
            pdf_sha256="0" * 64,
        )
        worlds.append(world)


def _grow_nested(world: OrgWorld, user: User, n: int) -> None:
    stage, sample = world.stage, world.sample
    existing = shear_reading_count(stage.pk)
    added = np.arange(existing, n, dtype=np.int64)
    write_shear_columns(
        stage.pk,
        ShearColumns(
            traverse=np.ones(added.size, dtype=np.int64),
            seq=100 + added,
            elapsed_min=(100 + added).astype(np.float64),
            horizontal_mm=np.full(added.size, 1.0),
            vertical_mm=np.zeros(added.size),
            force_reading=np.full(added.size, 1.0),
        ),
    )
    from testing.models import ConsolidationReading

    have = ConsolidationReading.objects.filter(stage=stage).count()
    ConsolidationReading.objects.bulk_create(
        ConsolidationReading(stage=stage, elapsed_min=100 + i, settlement_mm=0.1)
        for i in range(have, n)
    )
    while sample.events.count() < n:
        target = (
            SampleStatus.SCHEDULED
            if sample.status == SampleStatus.RECEIVED
            else SampleStatus.RECEIVED
        )
        sample_transition(sample=sample, to_status=target, user=user)


def _count(user_pk: int, url: str) -> tuple[int, Any]:
    client = APIClient()
    client.force_authenticate(User.objects.get(pk=user_pk))  # a fresh instance: no cached profile
    with CaptureQueriesContext(connection) as queries:
        response = client.get(url)
    assert response.status_code == 200, (url, response.content[:200])
    return len(queries), response.json()


@pytest.mark.django_db
@pytest.mark.parametrize("persona", ["technician", "client_a"])
def test_list_query_counts_do_not_grow_with_rows(cast: Cast, persona: str) -> None:
    user = getattr(cast, persona)
    worlds: list[OrgWorld] = []
    counts: dict[str, list[int]] = {}
    sizes: dict[str, list[int]] = {}
    for n in (2, 20):
        _grow(cast, worlds, n)
        _grow_nested(worlds[0], cast.technician, n)
        urls = {route: reverse(route) for route in EXPECTED}
        urls.update(
            {
                "api:stage-readings": reverse("api:stage-readings", args=[worlds[0].stage.pk]),
                "api:stage-consolidation-readings": reverse(
                    "api:stage-consolidation-readings", args=[worlds[0].stage.pk]
                ),
                "api:sample-events": reverse("api:sample-events", args=[worlds[0].sample.pk]),
            }
        )
        for route, url in urls.items():
            if persona == "client_a" and route in STAFF_ONLY:
                continue
            queries, body = _count(user.pk, url)
            counts.setdefault(route, []).append(queries)
            sizes.setdefault(route, []).append(body.get("count", body.get("total", 0)))
    expected = {**EXPECTED, **NESTED}
    for route, (small, large) in counts.items():
        assert small == large == expected[route], (route, small, large)
        # the lists really did grow between the two measurements
        assert sizes[route][1] > sizes[route][0], (route, sizes[route])
