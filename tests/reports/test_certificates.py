"""The lab renews its signing certificate: revisions signed before still verify, strangers do not.

Each issued revision records the certificate that signed it (fingerprint and PEM); verification
trusts that certificate for that revision, not whichever one the lab holds today.
"""

from __future__ import annotations

import subprocess
from collections.abc import Callable
from io import StringIO
from pathlib import Path
from typing import Any

import pytest
from django.core.management import call_command
from django.db import DatabaseError, transaction

from reports import services, signing
from reports.models import ReportRevision, SigningCertificate
from reports.rendering.html import render_report_html
from reports.rendering.pdf import html_to_pdf
from reports.verification import verify_pdf_bytes
from tests.conftest import PASSWORD, Cast
from tests.reports.conftest import issue


def _use_new_certificate(settings: Any, folder: Path) -> Path:
    """Point the settings at a fresh key and self-signed certificate, as a renewal would."""
    settings.TAULINE_SIGNING_KEY_FILE = str(folder / "key.pem")
    settings.TAULINE_SIGNING_CERT_FILE = str(folder / "cert.pem")
    _, cert_path = signing.make_lab_certificate(common_name=f"lab certificate {folder.name}")
    return cert_path


def _pdf(revision: ReportRevision) -> bytes:
    with revision.pdf.open("rb") as fh:
        return fh.read()


def _openssl_sha256_fingerprint(pem: str, tmp_path: Path) -> str:
    """An outside check: the OpenSSL command line's SHA-256 fingerprint of the DER form."""
    path = tmp_path / "cert-for-openssl.pem"
    path.write_text(pem)
    out = subprocess.run(
        ["openssl", "x509", "-in", str(path), "-noout", "-fingerprint", "-sha256"],
        capture_output=True,
        text=True,
        check=True,
    ).stdout
    return out.strip().split("=", 1)[1].replace(":", "").lower()


def test_issue_records_the_certificate_that_signed(issued: ReportRevision, tmp_path: Path) -> None:
    certificate = issued.signing_certificate
    assert certificate is not None
    _, cert_path = signing.key_paths()
    # Same certificate as the lab's file, and the fingerprint is the one OpenSSL computes.
    assert signing.certificate_info(cert_path.read_bytes()).pem == certificate.pem
    assert certificate.sha256_fingerprint == _openssl_sha256_fingerprint(certificate.pem, tmp_path)
    assert certificate.first_used_at == issued.issued_at


def test_a_revision_signed_before_a_renewal_still_verifies(
    cast: Cast,
    issued: ReportRevision,
    settings: Any,
    tmp_path: Path,
    django_capture_on_commit_callbacks: Callable[..., Any],
) -> None:
    old_pdf = _pdf(issued)
    assert verify_pdf_bytes(old_pdf).authentic

    _use_new_certificate(settings, tmp_path / "renewed")
    # The renewal really happened: against today's certificate alone the old PDF is untrusted.
    assert not signing.verify_pdf(old_pdf).trusted
    # Against the certificate recorded for its revision it is authentic (now superseded below).
    verdict = verify_pdf_bytes(old_pdf)
    assert verdict.authentic, verdict.message
    assert verdict.revision is not None and verdict.revision.pk == issued.pk

    # An amendment issued after the renewal is signed and recorded with the new certificate.
    amendment = services.revision_supersede(
        user=cast.technician, revision=issued, reason="Reissued under the renewed certificate."
    )
    services.revision_check(user=cast.checker, revision=amendment, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=amendment, password=PASSWORD)
    amendment = issue(amendment, cast.approver, django_capture_on_commit_callbacks)
    assert amendment.state == "issued", amendment.render_error
    assert amendment.signing_certificate is not None and issued.signing_certificate is not None
    assert amendment.signing_certificate_id != issued.signing_certificate_id
    assert SigningCertificate.objects.count() == 2

    assert verify_pdf_bytes(_pdf(amendment)).authentic
    old = verify_pdf_bytes(old_pdf)
    assert old.authentic and old.status == "superseded", old.message
    # Each revision's signature is bound to its own certificate, not to any the lab ever held.
    new_pem = amendment.signing_certificate.pem
    assert not signing.verify_pdf(old_pdf, trusted_pem=new_pem).trusted
    assert not signing.verify_pdf(
        _pdf(amendment), trusted_pem=issued.signing_certificate.pem
    ).trusted

    # The scheduled integrity check agrees after the renewal.
    out = StringIO()
    call_command("verify_integrity", stdout=out, stderr=StringIO())
    assert out.getvalue().startswith("ok: 2 issued revision(s)")


def test_a_pdf_signed_by_an_unknown_certificate_does_not_verify(
    issued: ReportRevision, settings: Any, tmp_path: Path
) -> None:
    recorded = issued.signing_certificate
    assert recorded is not None
    # A certificate the lab never used signs the same report, rendered again.
    _use_new_certificate(settings, tmp_path / "stranger")
    unsigned = html_to_pdf(render_report_html(issued, issuing=True))
    forged = signing.sign_pdf(unsigned, reason="not ours", signer_name="Somebody Else")
    check = signing.verify_pdf(forged, trusted_pem=recorded.pem)
    assert check.signed and check.intact  # cryptographically sound ...
    assert not check.trusted and not check.valid  # ... but not by the revision's certificate
    verdict = verify_pdf_bytes(forged)
    assert not verdict.authentic and verdict.revision is None
    assert SigningCertificate.objects.count() == 1  # signing alone records nothing


def test_the_recorded_certificate_of_an_issued_revision_cannot_change(
    issued: ReportRevision, settings: Any, tmp_path: Path
) -> None:
    info = signing.certificate_info(_use_new_certificate(settings, tmp_path / "other").read_bytes())
    other = SigningCertificate.objects.create(
        sha256_fingerprint=info.sha256_fingerprint,
        pem=info.pem,
        subject=info.subject,
        serial_number=info.serial_number,
        not_valid_before=info.not_valid_before,
        not_valid_after=info.not_valid_after,
        first_used_at=info.not_valid_before,
    )
    issued.signing_certificate = other
    with pytest.raises(ValueError, match="signing_certificate cannot change"):
        issued.save()
    # The database trigger refuses it too, when the model is bypassed.
    # SQLite's RAISE(ABORT) surfaces as IntegrityError, PL/pgSQL's RAISE EXCEPTION as another
    # DatabaseError subclass: either way the row is unchanged.
    with pytest.raises(DatabaseError), transaction.atomic():
        ReportRevision.objects.filter(pk=issued.pk).update(signing_certificate=other)
    issued.refresh_from_db()
    assert issued.signing_certificate_id != other.pk
    with pytest.raises(ValueError, match="append-only"):
        other.save()


def test_a_signature_is_judged_by_the_certificate_validity_at_the_moment_asked(
    issued: ReportRevision,
) -> None:
    """X.509 validity (RFC 5280 §4.1.2.5): a certificate is valid only between notBefore and
    notAfter. The lab's certificate starts one day before it was made, so a moment a week earlier
    lies outside it and the same intact signature is then not trusted."""
    import datetime as dt

    data = _pdf(issued)
    pem = issued.signing_certificate.pem if issued.signing_certificate else None
    assert issued.issued_at is not None
    assert signing.verify_pdf(data, trusted_pem=pem, at=issued.issued_at).valid
    week_before = issued.issued_at - dt.timedelta(days=7)
    early = signing.verify_pdf(data, trusted_pem=pem, at=week_before)
    assert early.intact and not early.trusted and not early.valid


def test_a_revision_is_verified_as_of_its_issue_time(
    issued: ReportRevision, monkeypatch: pytest.MonkeyPatch
) -> None:
    """After the certificate has expired, an issued revision still verifies: the check asks for
    validity at the issue time from the lab's own record, not at today's date."""
    seen: dict[str, Any] = {}
    real = signing.verify_pdf

    def spy(pdf: bytes, **kwargs: Any) -> signing.SignatureCheck:
        seen.update(kwargs)
        return real(pdf, **kwargs)

    monkeypatch.setattr(signing, "verify_pdf", spy)
    result = verify_pdf_bytes(_pdf(issued))
    assert result.authentic
    assert seen["at"] == issued.issued_at
