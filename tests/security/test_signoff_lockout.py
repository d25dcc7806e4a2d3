"""A report sign-off password is a sign-in attempt for lockout purposes.

Wrong sign-off passwords count towards the same per-user limit as failed sign-ins, within the same
cool-off period; once it is reached the right password no longer signs, and signing in is locked
too (and the other way round: failed sign-ins lock signing).
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import timedelta
from typing import Any

import pytest
from axes.models import AccessAttempt
from django.db.models import F
from django.test import Client
from django.urls import reverse

from reports import services
from reports.models import AuditEvent, ReportRevision, SignOff
from tests.conftest import PASSWORD, Cast, Records
from tests.reports.conftest import build_test_set, compute

pytestmark = [pytest.mark.security, pytest.mark.django_db]


@pytest.fixture
def draft(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> ReportRevision:
    test = build_test_set(user=cast.technician, project=records_a.project, sample=records_a.sample)
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    return services.report_create(user=cast.technician, project=records_a.project, tests=[test])


def _wrong_sign_offs(cast: Cast, draft: ReportRevision, count: int) -> list[str]:
    messages = []
    for i in range(count):
        with pytest.raises(services.SignatureRefused) as refused:
            services.revision_check(user=cast.checker, revision=draft, password=f"wrong-{i}")
        messages.append(str(refused.value))
    return messages


def _sign_in(username: str, password: str, address: str) -> int:
    response = Client().post(
        reverse("login"), {"username": username, "password": password}, REMOTE_ADDR=address
    )
    return response.status_code


def _assert_nothing_signed(draft: ReportRevision) -> None:
    draft.refresh_from_db()
    assert draft.state == "draft"
    assert draft.checked_by_id is None
    assert SignOff.objects.count() == 0


def test_one_short_of_the_limit_the_right_password_still_signs(
    cast: Cast, draft: ReportRevision, settings: Any
) -> None:
    limit = settings.AXES_FAILURE_LIMIT
    messages = _wrong_sign_offs(cast, draft, limit - 1)
    assert not any("locked" in m for m in messages)
    # The failures are where axes counts failed sign-ins for that user.
    assert AccessAttempt.objects.filter(username="checker").count() == limit - 1

    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    draft.refresh_from_db()
    assert draft.state == "checked"
    assert SignOff.objects.filter(meaning="checked", user=cast.checker).count() == 1


def test_at_the_limit_the_right_password_is_refused_and_sign_in_is_locked(
    cast: Cast, draft: ReportRevision, settings: Any
) -> None:
    limit = settings.AXES_FAILURE_LIMIT
    messages = _wrong_sign_offs(cast, draft, limit)
    assert "locked until" in messages[-1]

    with pytest.raises(services.SignatureRefused, match=r"signing .*is locked until"):
        services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    _assert_nothing_signed(draft)
    refusals = AuditEvent.objects.filter(action="signature_refused", actor=cast.checker)
    assert refusals.count() == limit + 1
    assert "locked" in refusals.latest("id").reason

    # Signing in is locked for that user too, from any address, right password or not...
    assert _sign_in("checker", PASSWORD, "10.7.0.1") == 429
    # ...but not for another user behind the same address.
    assert _sign_in("approver", PASSWORD, "10.7.0.1") == 302


def test_after_the_cool_off_the_right_password_signs_again(
    cast: Cast, draft: ReportRevision, settings: Any
) -> None:
    _wrong_sign_offs(cast, draft, settings.AXES_FAILURE_LIMIT)
    with pytest.raises(services.SignatureRefused, match="locked"):
        services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    _assert_nothing_signed(draft)

    # The cool-off period passes.
    AccessAttempt.objects.filter(username="checker").update(
        attempt_time=F("attempt_time") - settings.AXES_COOLOFF_TIME - timedelta(seconds=1)
    )
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    draft.refresh_from_db()
    assert draft.state == "checked"
    assert _sign_in("checker", PASSWORD, "10.7.0.2") == 302


def test_failed_sign_ins_and_sign_offs_share_one_limit(
    cast: Cast, draft: ReportRevision, settings: Any
) -> None:
    limit = settings.AXES_FAILURE_LIMIT
    for i in range(limit - 1):
        assert _sign_in("checker", f"guess-{i}", f"10.8.0.{i + 1}") == 200
    _wrong_sign_offs(cast, draft, 1)

    with pytest.raises(services.SignatureRefused, match="locked"):
        services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    _assert_nothing_signed(draft)
    assert _sign_in("checker", PASSWORD, "10.8.1.1") == 429
