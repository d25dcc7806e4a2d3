"""A revision withdrawn after issue is evidence: what it printed and who signed it never change,
and it stays withdrawn. A revision withdrawn before it was issued stays editable."""

from __future__ import annotations

from typing import Any

import pytest
from django.db import DatabaseError, transaction

from reports import services
from reports.models import ReportRevision
from tests.conftest import PASSWORD, Cast

_FROZEN_COLUMNS = (
    "state",
    "content",
    "content_sha256",
    "pdf",
    "pdf_sha256",
    "issued_at",
    "issued_by_id",
    "checked_by_id",
    "approved_by_id",
    "prepared_by_id",
    "title",
    "remarks",
    "deviations",
    "signing_certificate_id",
)


def _stored(revision: ReportRevision) -> dict[str, Any]:
    return ReportRevision.objects.filter(pk=revision.pk).values(*_FROZEN_COLUMNS).get()


@pytest.fixture
def withdrawn(cast: Cast, issued: ReportRevision) -> ReportRevision:
    assert issued.state == "issued", issued.render_error
    revision = services.revision_withdraw(
        user=cast.manager, revision=issued, reason="Wrong sample tested."
    )
    assert revision.state == "withdrawn"
    assert revision.issued_at is not None and revision.pdf_sha256
    return revision


@pytest.mark.parametrize(
    "change",
    [
        {"pdf_sha256": "0" * 64},
        {"remarks": "rewritten after withdrawal"},
        {"content": {"rewritten": True}},
        {"content_sha256": "0" * 64},
        {"issued_at": None},
        {"state": "draft", "issued_at": None},
    ],
    ids=["pdf_sha256", "remarks", "content", "content_sha256", "issued_at", "unissue"],
)
def test_database_refuses_changing_what_a_withdrawn_issued_revision_printed(
    withdrawn: ReportRevision, change: dict[str, Any]
) -> None:
    before = _stored(withdrawn)
    # SQLite's RAISE(ABORT) surfaces as IntegrityError, PL/pgSQL's RAISE EXCEPTION as another
    # DatabaseError subclass: either way the row is unchanged.
    with pytest.raises(DatabaseError), transaction.atomic():
        ReportRevision.objects.filter(pk=withdrawn.pk).update(**change)
    assert _stored(withdrawn) == before


@pytest.mark.parametrize("state", ["draft", "approved", "issued", "superseded"])
def test_database_keeps_a_withdrawn_issued_revision_withdrawn(
    withdrawn: ReportRevision, state: str
) -> None:
    before = _stored(withdrawn)
    with pytest.raises(DatabaseError), transaction.atomic():
        ReportRevision.objects.filter(pk=withdrawn.pk).update(state=state)
    assert _stored(withdrawn) == before
    assert before["state"] == "withdrawn"


def test_model_refuses_editing_a_withdrawn_issued_revision(withdrawn: ReportRevision) -> None:
    before = _stored(withdrawn)
    withdrawn.remarks = "rewritten after withdrawal"
    with pytest.raises(ValueError, match="remarks cannot change"):
        withdrawn.save()
    withdrawn.refresh_from_db()
    withdrawn.pdf_sha256 = "0" * 64
    with pytest.raises(ValueError, match="pdf_sha256 cannot change"):
        withdrawn.save()
    withdrawn.refresh_from_db()
    withdrawn.state = "draft"
    with pytest.raises(ValueError, match="stays withdrawn"):
        withdrawn.save()
    assert _stored(withdrawn) == before


def test_fields_outside_the_frozen_set_still_save_on_a_withdrawn_issued_revision(
    withdrawn: ReportRevision,
) -> None:
    """The guard is not a blanket lock: saving the row unchanged, or a bookkeeping column that
    is not printed, still works."""
    before = _stored(withdrawn)
    withdrawn.save()
    ReportRevision.objects.filter(pk=withdrawn.pk).update(render_error="")
    assert _stored(withdrawn) == before


@pytest.mark.parametrize("stage", ["draft", "approved"])
def test_a_revision_withdrawn_before_issue_can_still_change(
    cast: Cast, draft: ReportRevision, stage: str
) -> None:
    if stage == "approved":
        services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
        services.revision_approve(user=cast.approver, revision=draft, password=PASSWORD)
    revision = services.revision_withdraw(
        user=cast.manager, revision=draft, reason="Client cancelled."
    )
    assert revision.state == "withdrawn" and revision.issued_at is None
    ReportRevision.objects.filter(pk=revision.pk).update(
        pdf_sha256="0" * 64, remarks="edited after withdrawal", content={"edited": True}
    )
    revision.refresh_from_db()
    assert revision.pdf_sha256 == "0" * 64
    assert revision.remarks == "edited after withdrawal"
    assert revision.content == {"edited": True}
    revision.deviations = "changed through the model"
    revision.save()
    ReportRevision.objects.filter(pk=revision.pk).update(state="draft")
    revision.refresh_from_db()
    assert revision.state == "draft"
    assert revision.deviations == "changed through the model"
