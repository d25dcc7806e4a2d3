"""Admin pages for reports, revisions, sign-offs, amendments, the audit trail and the signing
certificates: all read-only.

Every report change is a workflow step with a re-entered password, a sign-off bound to the content
hash and an audit event (``reports.services``); an admin form would go around all three. These
pages are for looking things up.
"""

from __future__ import annotations

from typing import Any

from django.contrib import admin
from django.http import HttpRequest

from reports.models import (
    AuditEvent,
    Report,
    ReportRevision,
    RevisionChange,
    SigningCertificate,
    SignOff,
)
from testing.admin_results import ReadOnlyAdmin


class _ReadOnlyInline(admin.TabularInline[Any, Any]):
    extra = 0
    can_delete = False

    def has_add_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False


class SignOffInline(_ReadOnlyInline):
    model = SignOff
    fields = ("meaning", "printed_name", "role", "signed_at", "content_sha256", "pdf_sha256")


class RevisionChangeInline(_ReadOnlyInline):
    model = RevisionChange
    fields = ("item", "old_value", "new_value", "reason")


@admin.register(Report)
class ReportAdmin(ReadOnlyAdmin):
    list_display = ("number", "project", "created_by", "created_at")
    list_filter = ("project__organisation",)
    search_fields = ("number", "project__reference")
    list_select_related = ("project", "created_by")


@admin.register(ReportRevision)
class ReportRevisionAdmin(ReadOnlyAdmin):
    list_display = ("report", "number", "state", "title", "issued_at", "signing_certificate")
    list_filter = ("state",)
    search_fields = ("report__number", "pdf_sha256", "content_sha256")
    list_select_related = ("report", "signing_certificate")
    exclude = ("content",)  # the frozen snapshot is large; the PDF shows it
    inlines = [SignOffInline, RevisionChangeInline]


@admin.register(SignOff)
class SignOffAdmin(ReadOnlyAdmin):
    list_display = ("revision", "meaning", "printed_name", "role", "signed_at")
    list_filter = ("meaning",)
    search_fields = ("revision__report__number", "printed_name", "content_sha256")
    list_select_related = ("revision__report",)


@admin.register(RevisionChange)
class RevisionChangeAdmin(ReadOnlyAdmin):
    list_display = ("revision", "item", "old_value", "new_value", "reason")
    search_fields = ("revision__report__number", "item", "reason")
    list_select_related = ("revision__report",)


@admin.register(AuditEvent)
class AuditEventAdmin(ReadOnlyAdmin):
    list_display = ("at", "actor_name", "action", "subject", "field", "reason")
    list_filter = ("action",)
    search_fields = ("subject", "actor_name", "reason")
    date_hierarchy = "at"


@admin.register(SigningCertificate)
class SigningCertificateAdmin(ReadOnlyAdmin):
    list_display = ("subject", "sha256_fingerprint", "not_valid_after", "first_used_at")
    search_fields = ("subject", "sha256_fingerprint", "serial_number")
