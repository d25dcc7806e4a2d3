"""Who sees what: every persona against own-organisation and other-organisation records."""

from __future__ import annotations

from collections.abc import Callable
from datetime import date
from decimal import Decimal
from typing import Any

import pytest
from django.contrib.auth.models import AnonymousUser
from django.http import Http404
from django.utils import timezone

from testing import access, selectors
from testing.models import DirectShearTest, ShearStage, Specimen
from tests.conftest import Cast, Records

STAFF = ("technician", "checker", "approver", "manager")


def _tree(records: Records, cast: Cast) -> dict[str, Any]:
    specimen = Specimen.objects.create(
        sample=records.sample,
        reference="S1",
        depth_top_m=Decimal("1.3"),
        preparation="undisturbed",
        length_mm=60,
        width_mm=60,
        height_mm=20,
        initial_mass_g=150,
    )
    test = DirectShearTest.objects.create(
        project=records.project,
        reference="DS1",
        method="bs-1377-7",
        method_edition="1990",
        box_length_mm=60,
        box_width_mm=60,
        requested_on=date(2026, 11, 2),
        created_by=cast.technician,
    )
    stage = ShearStage.objects.create(
        test=test,
        stage_number=1,
        specimen=specimen,
        direct_mass_kg=2,
        hanger_mass_kg=1,
        weights_mass_kg=5,
        lever_ratio=10,
    )
    return {
        "project": records.project,
        "borehole": records.borehole,
        "sample": records.sample,
        "specimen": specimen,
        "test": test,
        "stage": stage,
    }


GETTERS: dict[str, Callable[..., Any]] = {
    "project": lambda user, obj: access.project_get_for_user(user=user, project_id=obj.pk),
    "borehole": lambda user, obj: access.borehole_get_for_user(user=user, borehole_id=obj.pk),
    "sample": lambda user, obj: access.sample_get_for_user(user=user, sample_id=obj.pk),
    "specimen": lambda user, obj: access.specimen_get_for_user(user=user, specimen_id=obj.pk),
    "test": lambda user, obj: access.test_get_for_user(user=user, test_id=obj.pk),
    "stage": lambda user, obj: access.stage_get_for_user(user=user, stage_id=obj.pk),
}
RELEASE_GATED = {"test", "stage"}


def _sees(getter: Callable[..., Any], user: Any, obj: Any) -> bool:
    try:
        return getter(user, obj).pk == obj.pk
    except Http404:
        return False


@pytest.mark.parametrize("kind", GETTERS)
def test_access_matrix_before_and_after_release(
    cast: Cast, records_a: Records, records_b: Records, kind: str
) -> None:
    tree_a, tree_b = _tree(records_a, cast), _tree(records_b, cast)
    users = {name: getattr(cast, name) for name in (*STAFF, "client_a", "client_b", "deactivated")}
    users["anonymous"] = AnonymousUser()
    getter = GETTERS[kind]

    def matrix() -> dict[tuple[str, str], bool]:
        return {
            (name, org): _sees(getter, user, tree[kind])
            for name, user in users.items()
            for org, tree in (("A", tree_a), ("B", tree_b))
        }

    expected_unreleased = {
        (name, org): (name in STAFF)
        or (name == f"client_{org.lower()}" and kind not in RELEASE_GATED)
        for name in users
        for org in ("A", "B")
    }
    assert matrix() == expected_unreleased

    DirectShearTest.objects.filter(pk=tree_a["test"].pk).update(released_at=timezone.now())
    expected_released = {
        key: allowed or (key == ("client_a", "A")) for key, allowed in expected_unreleased.items()
    }
    assert matrix() == expected_released


@pytest.mark.parametrize("bad_id", [999_999, "not-a-number", None, "1 OR 1=1"])
def test_missing_and_malformed_ids_answer_404(cast: Cast, bad_id: object) -> None:
    with pytest.raises(Http404):
        access.project_get_for_user(user=cast.manager, project_id=bad_id)


def test_other_organisation_answers_like_a_missing_record(cast: Cast, records_a: Records) -> None:
    with pytest.raises(Http404) as foreign:
        access.project_get_for_user(user=cast.client_b, project_id=records_a.project.pk)
    with pytest.raises(Http404) as missing:
        access.project_get_for_user(user=cast.client_b, project_id=10**9)
    assert str(foreign.value) == str(missing.value)


def test_lists_are_scoped(cast: Cast, records_a: Records, records_b: Records) -> None:
    assert set(selectors.projects_for_user(user=cast.client_a)) == {records_a.project}
    assert set(selectors.projects_for_user(user=cast.client_b)) == {records_b.project}
    assert set(selectors.projects_for_user(user=cast.checker)) == {
        records_a.project,
        records_b.project,
    }
    assert list(selectors.samples_for_user(user=cast.deactivated)) == []
    assert list(selectors.samples_for_user(user=AnonymousUser())) == []


def test_role_predicates(cast: Cast) -> None:
    table = {
        "technician": (True, False, False, False),
        "checker": (False, True, False, False),
        "approver": (False, False, True, False),
        "manager": (True, False, False, True),
        "client_a": (False, False, False, False),
        "deactivated": (False, False, False, False),
    }
    for name, expected in table.items():
        user = getattr(cast, name)
        got = (
            access.can_enter_readings(user),
            access.can_check(user),
            access.can_approve(user),
            access.can_manage(user),
        )
        assert got == expected, name


def test_status_counts_are_scoped_and_count_overdue(
    cast: Cast, records_a: Records, records_b: Records
) -> None:
    today = records_a.sample.due_on + (
        records_a.sample.due_on - records_a.sample.received_on
    )  # past due
    staff = selectors.sample_status_counts(user=cast.manager, today=today)
    client = selectors.sample_status_counts(user=cast.client_a, today=today)
    assert (staff["received"], staff["overdue"]) == (2, 2)
    assert (client["received"], client["overdue"]) == (1, 1)
    assert (
        selectors.sample_status_counts(user=cast.client_a, today=records_a.sample.received_on)[
            "overdue"
        ]
        == 0
    )
