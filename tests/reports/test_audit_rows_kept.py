"""On PostgreSQL the database itself keeps the trail: audit events and sign-off records can be
neither changed nor deleted, whatever the application code does."""

from __future__ import annotations

import pytest
from django.db import DatabaseError, connection, transaction

from reports.models import AuditEvent, ReportRevision, SignOff

pytestmark = pytest.mark.skipif(
    connection.vendor != "postgresql", reason="the delete guard is a PostgreSQL trigger"
)


def test_audit_events_and_sign_offs_cannot_be_deleted(issued: ReportRevision) -> None:
    events, signoffs = AuditEvent.objects.count(), SignOff.objects.count()
    assert events > 0 and signoffs == 3  # checked, approved, issued
    with pytest.raises(DatabaseError), transaction.atomic():
        AuditEvent.objects.all().delete()
    with pytest.raises(DatabaseError), transaction.atomic():
        SignOff.objects.filter(revision=issued).delete()
    assert (AuditEvent.objects.count(), SignOff.objects.count()) == (events, signoffs)
