"""Signed PDFs: any one-byte change is caught; the command-line check agrees; poppler agrees."""

from __future__ import annotations

import random
import subprocess
import tempfile
from pathlib import Path

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError

from reports import signing
from reports.models import ReportRevision
from reports.verification import verify_number_and_hash, verify_pdf_bytes


def test_one_byte_changes_at_100_offsets_are_all_detected(issued: ReportRevision) -> None:
    with issued.pdf.open("rb") as fh:
        original = fh.read()
    assert verify_pdf_bytes(original).authentic
    rng = random.Random(20261201)
    offsets = rng.sample(range(len(original)), 100)
    detected = 0
    signature_detected = 0
    for offset in offsets:
        tampered = bytearray(original)
        tampered[offset] ^= 0x01 << rng.randrange(8)
        result = verify_pdf_bytes(bytes(tampered))
        detected += not result.authentic
        signature_detected += not signing.verify_pdf(bytes(tampered)).valid
    assert detected == 100
    # The signature alone (without the stored fingerprint) catches most; bytes inside the
    # signature's own hex container or in unused padding may still parse as a valid signature.
    assert signature_detected >= 90, signature_detected


def test_verify_report_command(issued: ReportRevision) -> None:
    with issued.pdf.open("rb") as fh:
        data = fh.read()
    with tempfile.TemporaryDirectory() as folder:
        good, bad = Path(folder) / "good.pdf", Path(folder) / "bad.pdf"
        good.write_bytes(data)
        changed = bytearray(data)
        changed[len(changed) // 3] ^= 0x20
        bad.write_bytes(bytes(changed))
        from io import StringIO

        out = StringIO()
        call_command("verify_report", str(good), stdout=out)
        assert out.getvalue().startswith("valid")
        with pytest.raises(CommandError, match="not valid"):
            call_command("verify_report", str(bad))


def test_number_and_hash_lookup(issued: ReportRevision) -> None:
    assert verify_number_and_hash(number=issued.report.number, sha256=issued.pdf_sha256).authentic
    assert not verify_number_and_hash(number="TR-0000-0000", sha256=issued.pdf_sha256).authentic
    assert not verify_number_and_hash(number=issued.report.number, sha256="0" * 64).authentic


def test_poppler_reads_the_signature_as_valid(issued: ReportRevision) -> None:
    """An outside check: poppler's pdfsig validates the signature's cryptography."""
    with tempfile.NamedTemporaryFile(suffix=".pdf") as fh:
        with issued.pdf.open("rb") as src:
            fh.write(src.read())
        fh.flush()
        out = subprocess.run(
            ["pdfsig", fh.name], capture_output=True, text=True, check=False
        ).stdout
    assert "Signature is Valid" in out, out
    assert "Total document signed" in out, out
