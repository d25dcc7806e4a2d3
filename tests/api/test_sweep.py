"""Client A's token against every record of client B: nothing succeeds, nothing leaks.

Per OWASP API Security Top 10 (2023) API1 (object-level authorisation): another organisation's
record must answer exactly like one that does not exist.
"""

from __future__ import annotations

from datetime import timedelta

import pytest
from django.urls import reverse

from tests.api.conftest import World, make_result_rows, token_client
from tests.api.routes import MISSING_ID, OBJECT_OF, api_routes, basename, call, detail_url

SWEEP_METHODS = ("GET", "POST", "PUT", "PATCH", "DELETE")


def _b_objects(world: World) -> dict[str, list[int]]:
    b = world.b
    ids = {base: [getattr(b, attr).pk] for base, attr in OBJECT_OF.items()}
    ids["test-set"].append(b.open_test.pk)
    ids["specimen"].append(b.spare_specimen.pk)
    ids["computation-run"].append(b.envelope.run_id)
    # B's issued revision (with its PDF) is the OBJECT_OF target; add those in progress too.
    for revision in (b.draft_revision, b.checked_revision, b.approved_revision):
        assert revision is not None
        ids["report-revision"].append(revision.pk)
    return ids


@pytest.mark.django_db
def test_client_a_gets_nothing_of_client_b_and_the_same_answer_as_for_a_missing_id(
    world: World,
) -> None:
    client = token_client(world.cast.client_a)
    objects = _b_objects(world)
    attempts = successes = 0
    differences: list[str] = []
    detail_routes = sorted({name for name, pattern in api_routes() if "<pk>" in pattern})
    for route in detail_routes:
        base = basename(route)
        assert base is not None, route
        for pk in objects[base]:
            for method in SWEEP_METHODS:
                body = {} if method in {"POST", "PUT", "PATCH"} else None
                response = call(client, method, detail_url(route, pk), body)
                missing = call(client, method, detail_url(route, MISSING_ID), body)
                attempts += 1
                if response.status_code < 400:
                    successes += 1
                if (response.status_code, response.content) != (
                    missing.status_code,
                    missing.content,
                ):
                    differences.append(
                        f"{method} {route} {pk}: {response.status_code} {response.content[:120]!r} "
                        f"vs missing {missing.status_code} {missing.content[:120]!r}"
                    )
    assert attempts >= 5 * len(detail_routes)
    assert successes == 0
    assert not differences, "\n".join(differences)
    assert {"api:report-revision-detail", "api:report-revision-pdf"} <= set(detail_routes)

    # The refusals are not for want of content: B's own token gets B's issued revision and PDF.
    assert world.b.revision is not None
    own = token_client(world.cast.client_b)
    pdf = own.get(reverse("api:report-revision-pdf", kwargs={"pk": world.b.revision.pk}))
    assert pdf.status_code == 200
    assert pdf["Content-Type"] == "application/pdf"
    assert pdf.getvalue().startswith(b"%PDF-")


LIST_FILTERS = {
    "api:project-list": {"organisation": "organisation"},
    "api:borehole-list": {"project": "project"},
    "api:sample-list": {"project": "project", "borehole": "borehole"},
    "api:specimen-list": {"sample": "sample", "project": "project"},
    "api:test-set-list": {"project": "project"},
    "api:stage-list": {"test": "test"},
    "api:stage-result-list": {"stage": "stage", "test": "test", "project": "project"},
    "api:envelope-list": {"test": "test", "project": "project"},
    "api:report-revision-list": {},  # no filters: the page-size abuse only
}


@pytest.mark.django_db
def test_lists_filters_and_page_size_abuse_show_client_a_no_foreign_row(world: World) -> None:
    client = token_client(world.cast.client_a)
    b_ids = _b_objects(world)
    for route, filters in LIST_FILTERS.items():
        base = basename(route)
        assert base is not None
        queries = [{"page_size": 100_000}] + [
            {name: getattr(world.b, attr).pk, "page_size": 100_000}
            for name, attr in filters.items()
        ]
        for query in queries:
            response = client.get(reverse(route), query)
            assert response.status_code == 200, (route, query, response.content)
            rows = response.json()["results"]
            assert len(rows) <= 200
            foreign = [row["id"] for row in rows if row["id"] in b_ids[base]]
            assert foreign == [], (route, query)
            if len(query) > 1:  # filtered by one of B's ids: nothing at all
                assert rows == [], (route, query)
    # And the same lists do show client A's own records (the scoping is not simply "nothing").
    own = client.get(reverse("api:stage-result-list")).json()["results"]
    assert [row["id"] for row in own] == [world.a.result.pk]
    # Of A's four revisions only the issued one is a client's to see.
    assert world.a.revision is not None
    own_revisions = client.get(reverse("api:report-revision-list")).json()["results"]
    assert [row["id"] for row in own_revisions] == [world.a.revision.pk]


@pytest.mark.django_db
def test_page_size_is_capped_at_200(plain_world: World) -> None:
    import numpy as np

    from testing.selectors_readings import ShearColumns
    from testing.services.readings_store import write_shear_columns

    i = np.arange(250, dtype=np.int64)
    write_shear_columns(
        plain_world.a.stage.pk,
        ShearColumns(
            traverse=np.ones(250, dtype=np.int64),
            seq=100 + i,
            elapsed_min=(10 + i).astype(np.float64),
            horizontal_mm=(0.01 * i).astype(np.float64),
            vertical_mm=np.zeros(250),
            force_reading=np.full(250, 1.0),
        ),
    )
    client = token_client(plain_world.cast.technician)
    url = reverse("api:stage-readings", kwargs={"pk": plain_world.a.stage.pk})
    body = client.get(url, {"page_size": 5000}).json()
    assert body["count"] == 253
    assert len(body["results"]) == 200
    assert len(client.get(url, {"page_size": 7}).json()["results"]) == 7


@pytest.mark.django_db
def test_clients_see_neither_unreleased_sets_nor_results_written_after_release(
    plain_world: World,
) -> None:
    client_a = token_client(plain_world.cast.client_a)
    technician = token_client(plain_world.cast.technician)
    open_url = reverse("api:test-set-detail", kwargs={"pk": plain_world.a.open_test.pk})
    assert client_a.get(open_url).status_code == 404
    assert technician.get(open_url).status_code == 200
    listed = [row["id"] for row in client_a.get(reverse("api:test-set-list")).json()["results"]]
    assert listed == [plain_world.a.test.pk]

    # A recompute after release adds a row; the client keeps seeing what was released.
    released_at = plain_world.a.test.released_at
    assert released_at is not None
    _, later = make_result_rows(plain_world.a.stage, at=released_at + timedelta(hours=1))
    later_url = reverse("api:stage-result-detail", kwargs={"pk": later.pk})
    assert client_a.get(later_url).status_code == 404
    assert technician.get(later_url).status_code == 200
    latest = client_a.get(reverse("api:stage-result-list"), {"latest": "true"}).json()["results"]
    assert [row["id"] for row in latest] == [plain_world.a.result.pk]
    staff_latest = technician.get(
        reverse("api:stage-result-list"), {"latest": "true", "test": plain_world.a.test.pk}
    ).json()["results"]
    assert [row["id"] for row in staff_latest] == [later.pk]
