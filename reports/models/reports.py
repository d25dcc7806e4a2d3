"""A report covers one or more test sets of a project; each change after issue is a new revision.

A revision freezes what it shows: it points at the exact result rows it was built from and keeps
a JSON snapshot of every value (with units) that the PDF prints. Rendering reads only the
snapshot, so recomputing a stage later can never change a revision.
"""

from __future__ import annotations

import uuid
from typing import Any

from django.conf import settings
from django.db import models
from django.db.models import F, Q


class RevisionState(models.TextChoices):
    DRAFT = "draft", "Draft"
    CHECKED = "checked", "Checked"
    APPROVED = "approved", "Approved"
    ISSUING = "issuing", "Being issued"
    ISSUED = "issued", "Issued"
    SUPERSEDED = "superseded", "Superseded"
    WITHDRAWN = "withdrawn", "Withdrawn"


# States whose content, PDF and hashes are fixed for good.
FROZEN_STATES = frozenset({RevisionState.ISSUED, RevisionState.SUPERSEDED})
ACTIVE_STATES = frozenset(
    {RevisionState.DRAFT, RevisionState.CHECKED, RevisionState.APPROVED, RevisionState.ISSUING}
)
# Fields that may never change once a revision has been issued.
IMMUTABLE_AFTER_ISSUE = (
    "content",
    "content_sha256",
    "pdf",
    "pdf_sha256",
    "pdf_size_bytes",
    "issued_at",
    "issued_by",
    "checked_by",
    "approved_by",
    "prepared_by",
    "title",
    "remarks",
    "deviations",
    "signing_certificate",
)


def _column(name: str) -> str:
    """The attribute holding a field's stored value (the id, for a foreign key)."""
    return f"{name}_id" if name.endswith("_by") or name == "signing_certificate" else name


class Report(models.Model):
    """One numbered report of a project, covering one or more of its test sets."""

    number = models.CharField(
        max_length=60, unique=True, help_text="Unique report number from the lab's pattern."
    )
    project = models.ForeignKey("testing.Project", on_delete=models.PROTECT, related_name="reports")
    tests = models.ManyToManyField("testing.DirectShearTest", related_name="reports")
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["-created_at", "-id"]
        constraints = [
            models.CheckConstraint(name="report_number_not_blank", condition=~Q(number="")),
        ]

    def __str__(self) -> str:
        return self.number


def _pdf_path(instance: ReportRevision, filename: str) -> str:
    # Generated name only: nothing from the user reaches the file system.
    return f"reports/{instance.public_id.hex}.pdf"


class ReportRevision(models.Model):
    """One revision of a report, from draft to issued; superseded when a later one is issued."""

    report = models.ForeignKey(Report, on_delete=models.PROTECT, related_name="revisions")
    number = models.PositiveSmallIntegerField(help_text="Revision number, 1 for the first issue.")
    public_id = models.UUIDField(default=uuid.uuid4, unique=True, editable=False)
    state = models.CharField(
        max_length=12, choices=RevisionState.choices, default=RevisionState.DRAFT
    )
    title = models.CharField(max_length=200, default="Direct shear test report")
    remarks = models.TextField(blank=True, help_text="Remarks printed in the report.")
    deviations = models.TextField(
        blank=True, help_text="Additions to, deviations from or exclusions from the method."
    )
    replaces = models.OneToOneField(
        "self",
        on_delete=models.PROTECT,
        null=True,
        blank=True,
        related_name="replaced_by",
        help_text="The issued revision this one amends.",
    )
    amendment_reason = models.TextField(blank=True)
    # The frozen snapshot and exactly which result rows it came from.
    content = models.JSONField(default=dict)
    content_sha256 = models.CharField(max_length=64)
    stage_results = models.ManyToManyField("testing.StageResult", related_name="+", blank=True)
    envelope_results = models.ManyToManyField(
        "testing.EnvelopeResult", related_name="+", blank=True
    )
    prepared_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    checked_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    approved_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    issued_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    issue_requested_at = models.DateTimeField(null=True, blank=True)
    render_published_at = models.DateTimeField(
        null=True, blank=True, help_text="When the rendering was last handed to a report worker."
    )
    issued_at = models.DateTimeField(null=True, blank=True)
    superseded_at = models.DateTimeField(null=True, blank=True)
    withdrawn_at = models.DateTimeField(null=True, blank=True)
    withdrawn_reason = models.TextField(blank=True)
    render_error = models.TextField(blank=True)
    pdf = models.FileField(upload_to=_pdf_path, blank=True)
    pdf_sha256 = models.CharField(max_length=64, blank=True, db_index=True)
    pdf_size_bytes = models.PositiveIntegerField(null=True, blank=True)
    signing_certificate = models.ForeignKey(
        "reports.SigningCertificate",
        on_delete=models.PROTECT,
        null=True,
        blank=True,
        related_name="revisions",
        help_text="The lab certificate that signed the PDF (empty for revisions issued before "
        "certificates were recorded: those verify against the current one).",
    )

    class Meta:
        ordering = ["report", "-number"]
        constraints = [
            models.UniqueConstraint(
                fields=["report", "number"], name="revision_number_unique_in_report"
            ),
            # Exactly one current issued revision per report.
            models.UniqueConstraint(
                fields=["report"],
                condition=Q(state="issued"),
                name="one_issued_revision_per_report",
            ),
            # Only one revision of a report may be in flight at a time.
            models.UniqueConstraint(
                fields=["report"],
                condition=Q(state__in=["draft", "checked", "approved", "issuing"]),
                name="one_open_revision_per_report",
            ),
            models.CheckConstraint(name="revision_number_positive", condition=Q(number__gte=1)),
            models.CheckConstraint(
                name="revision_state_valid", condition=Q(state__in=RevisionState.values)
            ),
            # Separation of duties (NULL passes, so each applies once both are set).
            models.CheckConstraint(
                name="revision_checker_not_preparer", condition=~Q(checked_by=F("prepared_by"))
            ),
            models.CheckConstraint(
                name="revision_approver_not_checker", condition=~Q(approved_by=F("checked_by"))
            ),
            models.CheckConstraint(
                name="revision_approver_not_preparer", condition=~Q(approved_by=F("prepared_by"))
            ),
            models.CheckConstraint(
                name="revision_issuer_not_checker", condition=~Q(issued_by=F("checked_by"))
            ),
            models.CheckConstraint(
                name="revision_issuer_not_preparer", condition=~Q(issued_by=F("prepared_by"))
            ),
            # Each state carries the sign-offs and files it implies.
            models.CheckConstraint(
                name="revision_checked_has_checker",
                condition=Q(state__in=["draft", "withdrawn"]) | Q(checked_by__isnull=False),
            ),
            models.CheckConstraint(
                name="revision_approved_has_approver",
                condition=Q(state__in=["draft", "checked", "withdrawn"])
                | Q(approved_by__isnull=False),
            ),
            models.CheckConstraint(
                name="revision_issued_has_pdf",
                condition=~Q(state__in=["issued", "superseded"])
                | (
                    Q(issued_by__isnull=False, issued_at__isnull=False)
                    & ~Q(pdf="")
                    & ~Q(pdf_sha256="")
                ),
            ),
            models.CheckConstraint(
                name="revision_content_hash_set", condition=~Q(content_sha256="")
            ),
            models.CheckConstraint(
                name="revision_withdrawn_has_reason",
                condition=~Q(state="withdrawn") | ~Q(withdrawn_reason=""),
            ),
            models.CheckConstraint(
                name="revision_amendment_has_reason",
                condition=Q(replaces__isnull=True) | ~Q(amendment_reason=""),
            ),
        ]

    def __str__(self) -> str:
        return self.label

    def save(self, *args: Any, **kwargs: Any) -> None:
        """Refuse any change to an issued revision's content, files or sign-offs, also once it
        has been withdrawn after issue (then it also stays withdrawn).

        The database has the same guard (a trigger); this one gives a readable message first.
        """
        if self.pk is not None:
            stored = (
                type(self)
                .objects.filter(pk=self.pk)
                .values("state", *[_column(f) for f in IMMUTABLE_AFTER_ISSUE])
                .first()
            )
            withdrawn_after_issue = (
                stored is not None
                and stored["state"] == RevisionState.WITHDRAWN
                and stored["issued_at"] is not None
            )
            if withdrawn_after_issue and self.state != RevisionState.WITHDRAWN:
                raise ValueError(
                    f"Revision {self.pk} was withdrawn after issue; it stays withdrawn."
                )
            if stored is not None and (stored["state"] in FROZEN_STATES or withdrawn_after_issue):
                for name in IMMUTABLE_AFTER_ISSUE:
                    key = _column(name)
                    current = getattr(self, key)
                    if name == "pdf":
                        current = self.pdf.name or ""
                    if current != stored[key]:
                        raise ValueError(
                            f"Revision {self.pk} has been issued; its {name} cannot change."
                        )
        super().save(*args, **kwargs)

    @property
    def label(self) -> str:
        """The identifier printed on every page: report number and revision."""
        return f"{self.report.number} rev {self.number}"

    @property
    def is_current(self) -> bool:
        return self.state == RevisionState.ISSUED


class RevisionChange(models.Model):
    """One changed item in an amendment: what it was, what it is now, and why."""

    revision = models.ForeignKey(ReportRevision, on_delete=models.CASCADE, related_name="changes")
    item = models.CharField(max_length=300)
    old_value = models.TextField(blank=True)
    new_value = models.TextField(blank=True)
    reason = models.TextField()

    class Meta:
        ordering = ["revision", "id"]
        constraints = [
            models.CheckConstraint(name="revision_change_has_reason", condition=~Q(reason="")),
        ]

    def __str__(self) -> str:
        return f"{self.item}: {self.old_value} → {self.new_value}"
