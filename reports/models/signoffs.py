"""Sign-offs: who signed, in which role, what it meant, when, and the hash of exactly what was signed."""

from __future__ import annotations

from typing import Any

from django.conf import settings
from django.db import models
from django.db.models import Q


class SignOffMeaning(models.TextChoices):
    CHECKED = "checked", "Checked"
    APPROVED = "approved", "Approved"
    ISSUED = "issued", "Issued"


class SignOff(models.Model):
    """One electronic signature on a revision. Append-only."""

    revision = models.ForeignKey(
        "reports.ReportRevision", on_delete=models.PROTECT, related_name="signoffs"
    )
    meaning = models.CharField(max_length=10, choices=SignOffMeaning.choices)
    user = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")
    printed_name = models.CharField(max_length=200)
    role = models.CharField(max_length=40)
    signed_at = models.DateTimeField(help_text="UTC time of signing.")
    content_sha256 = models.CharField(max_length=64, help_text="sha256 of the frozen content.")
    pdf_sha256 = models.CharField(
        max_length=64, blank=True, help_text="sha256 of the signed PDF (issue only)."
    )

    class Meta:
        ordering = ["revision", "signed_at", "id"]
        constraints = [
            models.UniqueConstraint(fields=["revision", "meaning"], name="one_signoff_per_meaning"),
            models.CheckConstraint(
                name="signoff_meaning_valid", condition=Q(meaning__in=SignOffMeaning.values)
            ),
            models.CheckConstraint(name="signoff_hash_set", condition=~Q(content_sha256="")),
            models.CheckConstraint(name="signoff_name_set", condition=~Q(printed_name="")),
            models.CheckConstraint(
                name="signoff_issue_binds_pdf",
                condition=~Q(meaning="issued") | ~Q(pdf_sha256=""),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.get_meaning_display()} by {self.printed_name} ({self.role}) at {self.signed_at:%Y-%m-%d %H:%M} UTC"

    def save(self, *args: Any, **kwargs: Any) -> None:
        if self.pk is not None:
            raise ValueError("Sign-offs are append-only and cannot be changed.")
        super().save(*args, **kwargs)

    def delete(self, *args: Any, **kwargs: Any) -> tuple[int, dict[str, int]]:
        raise ValueError("Sign-offs are append-only and cannot be deleted.")
