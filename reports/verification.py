"""Is this PDF an authentic Tauline revision, which one, and is it current?

Authentic means both: its sha256 matches an issued revision's stored PDF, and its embedded lab
signature is intact and trusted by the lab certificate recorded for that revision when it was
signed (so revisions signed before the lab renewed its certificate still verify). Revisions
issued before certificates were recorded are checked against the current lab certificate.
Either failing is reported as not authentic.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from reports import signing
from reports.models import ReportRevision, RevisionState
from reports.selectors import replacement_of

MAX_UPLOAD_BYTES = 20 * 1024 * 1024
_SHA256 = re.compile(r"^[0-9a-f]{64}$")


@dataclass(frozen=True)
class Verification:
    authentic: bool
    message: str
    revision: ReportRevision | None = None
    replaced_by: ReportRevision | None = None
    signature: signing.SignatureCheck | None = None
    sha256: str = ""

    @property
    def status(self) -> str:
        if self.revision is None:
            return "unknown"
        if self.revision.state == RevisionState.ISSUED:
            return "current"
        return str(self.revision.state)


def _issued(sha256: str) -> ReportRevision | None:
    return (
        ReportRevision.objects.filter(pdf_sha256=sha256, issued_at__isnull=False)
        .select_related("report", "signing_certificate")
        .first()
    )


def _describe(revision: ReportRevision, replaced_by: ReportRevision | None) -> str:
    if revision.state == RevisionState.ISSUED:
        return f"valid: authentic {revision.label}, the current revision."
    if revision.state == RevisionState.SUPERSEDED:
        newer = f" by {replaced_by.label}" if replaced_by else ""
        return f"valid: authentic {revision.label}, but superseded{newer}."
    return f"valid: authentic {revision.label}, but withdrawn: {revision.withdrawn_reason}"


def revision_signature_check(revision: ReportRevision, data: bytes) -> signing.SignatureCheck:
    """The PDF's signature checked against the certificate that signed this revision, as of the
    time the lab issued it."""
    certificate = revision.signing_certificate
    return signing.verify_pdf(
        data, trusted_pem=certificate.pem if certificate else None, at=revision.issued_at
    )


def verify_pdf_bytes(data: bytes) -> Verification:
    sha = signing.sha256_hex(data)
    revision = _issued(sha)
    if revision is None:
        return Verification(
            authentic=False,
            sha256=sha,
            message="not valid: this file is not an issued revision of this laboratory "
            "(its fingerprint matches none). It may have been changed.",
        )
    check = revision_signature_check(revision, data)
    if not check.valid:
        return Verification(
            authentic=False,
            sha256=sha,
            signature=check,
            revision=revision,
            message=f"not valid: the laboratory signature does not check ({check.problem}).",
        )
    replaced_by = replacement_of(revision)
    return Verification(
        authentic=True,
        sha256=sha,
        signature=check,
        revision=revision,
        replaced_by=replaced_by,
        message=_describe(revision, replaced_by),
    )


def verify_number_and_hash(*, number: str, sha256: str) -> Verification:
    sha = sha256.strip().lower()
    if not _SHA256.match(sha):
        return Verification(
            authentic=False, message="not valid: a sha256 is 64 hexadecimal characters."
        )
    revision = _issued(sha)
    if revision is None or revision.report.number != number.strip():
        return Verification(
            authentic=False,
            sha256=sha,
            message="not valid: no issued revision has that report number and fingerprint.",
        )
    replaced_by = replacement_of(revision)
    return Verification(
        authentic=True,
        sha256=sha,
        revision=revision,
        replaced_by=replaced_by,
        message=_describe(revision, replaced_by),
    )
