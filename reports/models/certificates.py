"""The lab's signing certificates, as used: one row per certificate that ever signed a revision.

A lab renews its certificate from time to time. Each issued revision points at the certificate
that signed its PDF, so a revision signed before a renewal still verifies against the
certificate it was signed with, and a PDF signed by a certificate the lab never used does not.
Rows are append-only.
"""

from __future__ import annotations

from typing import Any

from django.db import models
from django.db.models import Q


class SigningCertificate(models.Model):
    """One lab signing certificate (public part only: PEM and its sha256 fingerprint)."""

    sha256_fingerprint = models.CharField(
        max_length=64,
        unique=True,
        help_text="sha256 of the certificate's DER encoding, lower-case hexadecimal.",
    )
    pem = models.TextField(help_text="The certificate in PEM form (public; no key is stored).")
    subject = models.CharField(max_length=300)
    serial_number = models.CharField(max_length=100, help_text="Serial number, hexadecimal.")
    not_valid_before = models.DateTimeField(help_text="UTC time.")
    not_valid_after = models.DateTimeField(help_text="UTC time.")
    first_used_at = models.DateTimeField(help_text="UTC time it first signed a revision.")

    class Meta:
        ordering = ["first_used_at", "id"]
        constraints = [
            models.CheckConstraint(
                name="signing_certificate_fingerprint_set", condition=~Q(sha256_fingerprint="")
            ),
            models.CheckConstraint(
                name="signing_certificate_pem_set",
                condition=Q(pem__startswith="-----BEGIN CERTIFICATE-----"),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.subject} (sha256 {self.sha256_fingerprint[:16]}…)"

    def save(self, *args: Any, **kwargs: Any) -> None:
        if self.pk is not None:
            raise ValueError("Signing certificate records are append-only and cannot be changed.")
        super().save(*args, **kwargs)

    def delete(self, *args: Any, **kwargs: Any) -> tuple[int, dict[str, int]]:
        raise ValueError("Signing certificate records are kept for verification.")
