"""`manage.py verify_integrity`: every issued PDF, signature and audit trail, end to end.

Reliability plan rows "signatures" (a one-byte change is detected) and "audit" (the trail is
complete), and issue 10 item 6. The hash is SHA-256 (FIPS 180-4) as computed by Python's hashlib;
the signature check is pyHanko's validator, through ``reports.signing``.
"""

from __future__ import annotations

from io import StringIO
from pathlib import Path

import numpy as np
import pytest
from django.core.management import CommandError, call_command
from django.db import connection

from reports.models import AuditEvent, ReportRevision
from testing.models import ShearReadingBlock

pytestmark = pytest.mark.security


def _verify() -> tuple[str, str]:
    out, err = StringIO(), StringIO()
    call_command("verify_integrity", stdout=out, stderr=err)
    return out.getvalue(), err.getvalue()


def _verify_fails() -> str:
    out, err = StringIO(), StringIO()
    with pytest.raises(CommandError) as failure:
        call_command("verify_integrity", stdout=out, stderr=err)
    return f"{failure.value}\n{err.getvalue()}"


def test_verify_integrity_passes_then_names_the_revision_for_each_kind_of_damage(
    issued_revision: ReportRevision,
) -> None:
    """One issued report (rendering it takes seconds), damaged and repaired in turn."""
    name = f"{issued_revision.label} (revision id {issued_revision.pk})"
    out, err = _verify()
    assert "ok: 1 issued revision(s)" in out
    assert err == ""

    # One flipped byte in the stored PDF: the hash and the signature both fail.
    path = Path(issued_revision.pdf.path)
    original = path.read_bytes()
    data = bytearray(original)
    data[len(data) // 2] ^= 0x01
    path.write_bytes(bytes(data))
    message = _verify_fails()
    assert name in message
    assert "does not match the recorded" in message
    assert "signature does not validate" in message

    # The file gone.
    path.unlink()
    assert f"{name}: stored PDF" in _verify_fails()
    path.write_bytes(original)
    assert "ok: 1" in _verify()[0]

    # One audit row deleted (a queryset delete goes around the model's guard, as a direct database
    # edit would; on PostgreSQL the trigger that refuses deletes is dropped first, as in a
    # tampered restored dump), then the first link of the content-hash chain.
    if connection.vendor == "postgresql":
        with connection.cursor() as cursor:
            cursor.execute("DROP TRIGGER IF EXISTS reports_audit_not_deleted ON reports_auditevent")
    trail = AuditEvent.objects.filter(subject=f"revision:{issued_revision.pk}")
    assert trail.filter(action="revision_approved").delete()[0] == 1
    message = _verify_fails()
    assert f"{name}: the 'revision_approved' audit event is missing" in message
    assert trail.filter(action="revision_created").delete()[0] == 1
    assert f"{name}: expected one 'revision_created' audit event, found 0" in _verify_fails()


def test_content_changed_in_the_database_fails(issued_revision: ReportRevision) -> None:
    # The database refuses this edit through its trigger; a restored, tampered dump would not.
    with connection.cursor() as cursor:
        cursor.execute(
            "DROP TRIGGER IF EXISTS reports_revision_frozen"
            + (" ON reports_reportrevision" if connection.vendor == "postgresql" else "")
        )
    content = dict(issued_revision.content)
    content["tampered"] = True
    ReportRevision.objects.filter(pk=issued_revision.pk).update(content=content)
    message = _verify_fails()
    assert f"{issued_revision.label} (revision id {issued_revision.pk})" in message
    assert "frozen content no longer matches" in message


def test_readings_changed_around_the_application_fail(issued_revision: ReportRevision) -> None:
    """The readings behind an issued report, edited directly in the database: the stage's readings
    no longer hash to what its last recorded change left."""
    out, _ = _verify()
    assert "readings of" in out and "match their audit trail" in out
    test = issued_revision.report.tests.first()
    assert test is not None
    stage = test.stages.order_by("stage_number").first()
    assert stage is not None
    block = ShearReadingBlock.objects.filter(stage=stage).order_by("traverse", "first_seq")[0]
    force = np.frombuffer(block.force_reading, dtype="<f8").copy()
    force[10] += 1.0  # one reading's force, one division or newton more
    ShearReadingBlock.objects.filter(pk=block.pk).update(force_reading=force.tobytes())
    message = _verify_fails()
    assert f"stage {stage.stage_number} (stage id {stage.pk})" in message
    assert "changed outside Tauline" in message


@pytest.mark.django_db
def test_a_missing_or_disabled_guard_trigger_fails_the_check() -> None:
    """Every guard trigger the migrations create is found; one dropped (or, on PostgreSQL,
    disabled) is named. The change is made inside the test's transaction and rolled back."""
    from labsite.dbguards import guard_trigger_problems
    from reports import guards as report_guards

    expected = (report_guards.GUARD_TRIGGERS,)
    assert guard_trigger_problems(*expected) == []
    out = StringIO()
    call_command("verify_integrity", "--skip-signatures", stdout=out)
    assert "database guard triggers in place" in out.getvalue()
    with connection.cursor() as cursor:
        if connection.vendor == "postgresql":
            cursor.execute(
                "ALTER TABLE reports_signoff DISABLE TRIGGER reports_signoff_append_only"
            )
            cursor.execute("DROP TRIGGER reports_audit_not_deleted ON reports_auditevent")
            dropped = "reports_audit_not_deleted on reports_auditevent is missing"
            disabled = "reports_signoff_append_only on reports_signoff is disabled"
        else:
            cursor.execute("DROP TRIGGER reports_signoff_append_only")
            cursor.execute("DROP TRIGGER reports_audit_append_only")
            dropped = "reports_audit_append_only on reports_auditevent is missing"
            disabled = "reports_signoff_append_only on reports_signoff is missing"
    problems = guard_trigger_problems(*expected)
    assert [p.removeprefix("database guard trigger ") for p in problems] == [dropped, disabled]
    err = StringIO()
    with pytest.raises(CommandError):
        call_command("verify_integrity", "--skip-signatures", stdout=StringIO(), stderr=err)
    assert dropped in err.getvalue() and disabled in err.getvalue()
