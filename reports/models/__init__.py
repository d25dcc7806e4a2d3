"""Reports, their revisions and sign-offs, and the append-only audit trail."""

from reports.models.audit import AuditEvent
from reports.models.certificates import SigningCertificate
from reports.models.reports import (
    ACTIVE_STATES,
    Report,
    ReportRevision,
    RevisionChange,
    RevisionState,
)
from reports.models.signoffs import SignOff, SignOffMeaning

__all__ = [
    "ACTIVE_STATES",
    "AuditEvent",
    "Report",
    "ReportRevision",
    "RevisionChange",
    "RevisionState",
    "SignOff",
    "SignOffMeaning",
    "SigningCertificate",
]
