"""Reads for reports, scoped to what the user may see.

Lab staff see every report. A client user sees only their own organisation's revisions that were
issued (current, superseded or later withdrawn) — never drafts. Anything else answers 404, the
same as a revision that does not exist.
"""

from __future__ import annotations

import uuid

from django.db.models import Q, QuerySet
from django.http import Http404

from reports.models import AuditEvent, Report, ReportRevision, RevisionState
from testing import access
from testing.access import AnyUser

_NOTHING = Q(pk__in=[])
CLIENT_VISIBLE_STATES = (RevisionState.ISSUED, RevisionState.SUPERSEDED, RevisionState.WITHDRAWN)


def revision_filter(user: AnyUser) -> Q:
    if access.is_lab_staff(user):
        return Q()
    org_id = access.client_organisation_id(user)
    if org_id is None:
        return _NOTHING
    return Q(report__project__organisation_id=org_id, state__in=CLIENT_VISIBLE_STATES) & Q(
        issued_at__isnull=False
    )


def revisions_for_user(*, user: AnyUser) -> QuerySet[ReportRevision]:
    return (
        ReportRevision.objects.filter(revision_filter(user))
        .select_related("report__project__organisation", "replaces")
        .order_by("report__number", "-number")
    )


def reports_for_user(*, user: AnyUser) -> QuerySet[Report]:
    if not access.is_lab_staff(user):
        return Report.objects.none()
    return Report.objects.select_related("project__organisation").prefetch_related("tests")


def revision_get_for_user(*, user: AnyUser, revision_id: int | str) -> ReportRevision:
    try:
        return revisions_for_user(user=user).get(pk=revision_id)
    except (ReportRevision.DoesNotExist, ValueError, TypeError) as exc:
        raise Http404("No such record.") from exc


def revision_get_by_public_id(*, user: AnyUser, public_id: uuid.UUID | str) -> ReportRevision:
    try:
        return revisions_for_user(user=user).get(public_id=public_id)
    except (ReportRevision.DoesNotExist, ValueError, TypeError) as exc:
        raise Http404("No such record.") from exc


def replacement_of(revision: ReportRevision) -> ReportRevision | None:
    """The revision that replaced this one, if it has been issued."""
    return (
        ReportRevision.objects.filter(replaces=revision, issued_at__isnull=False)
        .select_related("report")
        .first()
    )


def audit_for_revision(*, user: AnyUser, revision: ReportRevision) -> QuerySet[AuditEvent]:
    if not access.is_lab_staff(user):
        return AuditEvent.objects.none()
    subjects = [f"revision:{revision.pk}", f"report:{revision.report_id}"]
    return AuditEvent.objects.filter(subject__in=subjects).select_related("actor")
