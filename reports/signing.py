"""PDF signatures: PAdES baseline (B-B) with the lab's key, and verification. The only pyHanko import.

The key and certificate come from ``TAULINE_SIGNING_KEY_FILE`` / ``TAULINE_SIGNING_CERT_FILE``
(PEM). Without them, a self-signed lab certificate is made on first use under
``MEDIA_ROOT/keys`` — fine for development and the demo; a lab should use its own.
"""

from __future__ import annotations

import asyncio
import datetime as dt
import hashlib
import io
import os
import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TypeVar

from asn1crypto import x509 as asn1_x509
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.x509.oid import NameOID
from django.conf import settings
from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
from pyhanko.pdf_utils.reader import PdfFileReader
from pyhanko.sign import signers
from pyhanko.sign.fields import SigSeedSubFilter
from pyhanko.sign.validation import validate_pdf_signature
from pyhanko.sign.validation.status import SignatureCoverageLevel
from pyhanko_certvalidator import ValidationContext

SIGNATURE_FIELD = "TaulineLabSignature"
T = TypeVar("T")
_lock = threading.Lock()


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def key_paths() -> tuple[Path, Path]:
    key = settings.TAULINE_SIGNING_KEY_FILE
    cert = settings.TAULINE_SIGNING_CERT_FILE
    if key and cert:
        return Path(key), Path(cert)
    folder = Path(settings.MEDIA_ROOT) / "keys"
    return folder / "lab-signing-key.pem", folder / "lab-signing-cert.pem"


def make_lab_certificate(
    *, common_name: str | None = None, days: int = 3650, overwrite: bool = False
) -> tuple[Path, Path]:
    """Write a self-signed P-256 key and certificate for signing reports (development, demo)."""
    key_path, cert_path = key_paths()
    if key_path.exists() and cert_path.exists() and not overwrite:
        return key_path, cert_path
    key = ec.generate_private_key(ec.SECP256R1())
    name = x509.Name(
        [
            x509.NameAttribute(
                NameOID.COMMON_NAME, common_name or f"{settings.TAULINE_LAB_NAME} report signing"
            ),
            x509.NameAttribute(NameOID.ORGANIZATION_NAME, settings.TAULINE_LAB_NAME),
        ]
    )
    now = dt.datetime.now(dt.UTC)
    cert = (
        x509.CertificateBuilder()
        .subject_name(name)
        .issuer_name(name)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(days=1))
        .not_valid_after(now + dt.timedelta(days=days))
        .add_extension(x509.BasicConstraints(ca=True, path_length=None), critical=True)
        .add_extension(
            x509.KeyUsage(
                digital_signature=True,
                content_commitment=True,
                key_encipherment=False,
                data_encipherment=False,
                key_agreement=False,
                key_cert_sign=True,
                crl_sign=False,
                encipher_only=False,
                decipher_only=False,
            ),
            critical=True,
        )
        .sign(key, hashes.SHA256())
    )
    key_path.parent.mkdir(parents=True, exist_ok=True)
    fd = os.open(key_path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(fd, "wb") as fh:
        fh.write(
            key.private_bytes(
                serialization.Encoding.PEM,
                serialization.PrivateFormat.PKCS8,
                serialization.NoEncryption(),
            )
        )
    cert_path.write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    return key_path, cert_path


def _ensure_keys() -> tuple[Path, Path]:
    key_path, cert_path = key_paths()
    if not (key_path.exists() and cert_path.exists()):
        if settings.TAULINE_SIGNING_KEY_FILE:
            raise FileNotFoundError(
                f"TAULINE_SIGNING_KEY_FILE / TAULINE_SIGNING_CERT_FILE point at {key_path} and "
                f"{cert_path}, which do not both exist."
            )
        with _lock:
            make_lab_certificate()
    return key_path, cert_path


def _asn1_certificate(pem: bytes) -> asn1_x509.Certificate:
    der = x509.load_pem_x509_certificate(pem).public_bytes(serialization.Encoding.DER)
    return asn1_x509.Certificate.load(der)


def lab_certificate() -> asn1_x509.Certificate:
    _, cert_path = _ensure_keys()
    return _asn1_certificate(cert_path.read_bytes())


def _off_the_event_loop(fn: Callable[..., T], *args: Any, **kwargs: Any) -> T:
    """pyHanko's synchronous calls start an asyncio loop of their own, which fails inside a thread
    already running one (an async server, Playwright's synchronous API): run them on a short-lived
    thread of their own then."""
    try:
        asyncio.get_running_loop()
    except RuntimeError:
        return fn(*args, **kwargs)
    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="pdf-signing") as pool:
        return pool.submit(fn, *args, **kwargs).result()


@dataclass(frozen=True)
class CertificateInfo:
    """The public facts of a signing certificate, as recorded beside each issued revision."""

    pem: str
    sha256_fingerprint: str
    subject: str
    serial_number: str
    not_valid_before: dt.datetime
    not_valid_after: dt.datetime


def certificate_info(pem: str | bytes) -> CertificateInfo:
    """Fingerprint (sha256 of the DER form), subject and validity of a PEM certificate."""
    data = pem.encode("ascii") if isinstance(pem, str) else pem
    cert = x509.load_pem_x509_certificate(data)
    return CertificateInfo(
        pem=cert.public_bytes(serialization.Encoding.PEM).decode("ascii"),
        sha256_fingerprint=cert.fingerprint(hashes.SHA256()).hex(),
        subject=cert.subject.rfc4514_string(),
        serial_number=format(cert.serial_number, "x"),
        not_valid_before=cert.not_valid_before_utc,
        not_valid_after=cert.not_valid_after_utc,
    )


@dataclass(frozen=True)
class SignedPdf:
    pdf: bytes
    certificate: CertificateInfo  # the certificate that made this signature


def sign_pdf(pdf: bytes, *, reason: str, signer_name: str) -> bytes:
    """PAdES B-B signature over the whole PDF with the lab's key."""
    return sign_pdf_recorded(pdf, reason=reason, signer_name=signer_name).pdf


def sign_pdf_recorded(pdf: bytes, *, reason: str, signer_name: str) -> SignedPdf:
    """As :func:`sign_pdf`, also naming the certificate used (read once, with the key), so it can
    be recorded and later verified against even after the lab renews its certificate."""
    return _off_the_event_loop(_sign_pdf, pdf, reason=reason, signer_name=signer_name)


def _sign_pdf(pdf: bytes, *, reason: str, signer_name: str) -> SignedPdf:
    key_path, cert_path = _ensure_keys()
    signer = signers.SimpleSigner.load(str(key_path), str(cert_path))
    if signer is None:
        raise RuntimeError(
            f"Could not load the signing key {key_path} and certificate {cert_path}."
        )
    meta = signers.PdfSignatureMetadata(
        field_name=SIGNATURE_FIELD,
        subfilter=SigSeedSubFilter.PADES,
        md_algorithm="sha256",
        reason=reason,
        location=settings.TAULINE_LAB_NAME,
        name=signer_name,
    )
    writer = IncrementalPdfFileWriter(io.BytesIO(pdf))
    out = io.BytesIO()
    signers.PdfSigner(meta, signer=signer).sign_pdf(writer, output=out)
    der = signer.signing_cert.dump()
    pem = x509.load_der_x509_certificate(der).public_bytes(serialization.Encoding.PEM)
    return SignedPdf(pdf=out.getvalue(), certificate=certificate_info(pem))


@dataclass(frozen=True)
class SignatureCheck:
    """What the embedded signature says: ``valid`` only if intact, trusted and covering the file."""

    signed: bool
    intact: bool = False
    trusted: bool = False
    covers_whole_file: bool = False
    signer: str = ""
    signed_at: dt.datetime | None = None
    problem: str = ""

    @property
    def valid(self) -> bool:
        return self.signed and self.intact and self.trusted and self.covers_whole_file


def verify_pdf(
    pdf: bytes, *, trusted_pem: str | None = None, at: dt.datetime | None = None
) -> SignatureCheck:
    """Check the lab signature of a PDF offline: against ``trusted_pem`` (the certificate recorded
    for the revision) when given, else against the lab's current certificate; the certificate must
    have been valid at ``at`` (the revision's issue time from the lab's own record), default now.
    So a report keeps verifying after the certificate that signed it has expired."""
    return _off_the_event_loop(_verify_pdf, pdf, trusted_pem, at)


def _trust_root(trusted_pem: str | None) -> asn1_x509.Certificate:
    if trusted_pem is None:
        return lab_certificate()
    return _asn1_certificate(trusted_pem.encode("ascii"))


def _verify_pdf(
    pdf: bytes, trusted_pem: str | None = None, at: dt.datetime | None = None
) -> SignatureCheck:
    try:
        reader = PdfFileReader(io.BytesIO(pdf), strict=False)
        signatures = reader.embedded_signatures
    except Exception as exc:  # a damaged file is an answer, not a crash
        return SignatureCheck(signed=False, problem=f"Not a readable PDF: {type(exc).__name__}")
    if not signatures:
        return SignatureCheck(signed=False, problem="The PDF carries no signature.")
    sig = signatures[-1]
    try:
        context = ValidationContext(
            trust_roots=[_trust_root(trusted_pem)], allow_fetching=False, moment=at
        )
        status = validate_pdf_signature(sig, context)
    except Exception as exc:
        return SignatureCheck(
            signed=True, problem=f"Signature could not be validated: {type(exc).__name__}: {exc}"
        )
    whole = status.coverage == SignatureCoverageLevel.ENTIRE_FILE
    trusted = bool(status.trusted)
    problem = "" if (status.intact and status.valid and trusted and whole) else status.summary()
    outside = _outside_validity(status.signing_cert, at)
    if trusted and outside:
        trusted, problem = False, outside
    return SignatureCheck(
        signed=True,
        intact=bool(status.intact and status.valid),
        trusted=trusted,
        covers_whole_file=whole,
        signer=status.signing_cert.subject.human_friendly if status.signing_cert else "",
        signed_at=status.signer_reported_dt,
        problem=problem,
    )


def _outside_validity(cert: asn1_x509.Certificate | None, at: dt.datetime | None) -> str:
    """Why ``cert`` was not valid at ``at`` ("" if it was, or if no moment is asked). Path
    validation does not apply validity dates to a trust anchor, and the recorded certificate is
    its own anchor, so the dates are checked here."""
    if cert is None or at is None:
        return ""
    validity = cert["tbs_certificate"]["validity"]
    start, end = validity["not_before"].native, validity["not_after"].native
    if start <= at <= end:
        return ""
    return (
        f"The signing certificate was not valid at {at:%Y-%m-%d %H:%M} UTC "
        f"(valid {start:%Y-%m-%d %H:%M} to {end:%Y-%m-%d %H:%M} UTC)."
    )
