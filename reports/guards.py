"""The guard triggers reports' migrations create (0002, 0003, 0005, 0006), per database vendor:
issued revisions frozen, sign-offs, audit events and signing certificates append-only, and on
PostgreSQL sign-offs and audit events never deleted. Checked by ``verify_integrity``."""

from __future__ import annotations

from labsite.dbguards import GuardTriggers

_APPEND_ONLY = {
    "reports_reportrevision": ["reports_revision_frozen"],
    "reports_signoff": ["reports_signoff_append_only"],
    "reports_auditevent": ["reports_audit_append_only"],
    "reports_signingcertificate": ["reports_signingcertificate_append_only"],
}

GUARD_TRIGGERS: GuardTriggers = {
    "sqlite": _APPEND_ONLY,
    "postgresql": {
        **_APPEND_ONLY,
        "reports_signoff": ["reports_signoff_append_only", "reports_signoff_not_deleted"],
        "reports_auditevent": ["reports_audit_append_only", "reports_audit_not_deleted"],
    },
}
