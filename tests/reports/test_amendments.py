"""Amendments: a new revision names the one it replaces, lists each change, and the old bytes stay."""

from __future__ import annotations

import hashlib
import subprocess
from collections.abc import Callable
from typing import Any

from reports import services
from reports.models import ReportRevision, RevisionChange
from testing.models import ComputationRun, StageResult
from tests.conftest import PASSWORD, Cast
from tests.reports.conftest import issue


def _recomputed(result: StageResult, new_tau_kpa: float) -> StageResult:
    """A later result row for the same inputs (as a corrected reduction would write)."""
    run = ComputationRun.objects.create(
        kind="stage_reduction",
        subject_key=f"stage:{result.stage_id}",
        state="succeeded",
        reason="corrected failure pick",
        test=result.stage.test,
        stage=result.stage,
    )
    copy = StageResult.objects.get(pk=result.pk)
    copy.pk = None
    copy.run = run
    copy.failure_shear_stress_kpa = new_tau_kpa
    copy.save()
    return copy


def test_supersede_after_three_changed_values(
    cast: Cast, issued: ReportRevision, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    assert issued.state == "issued", issued.render_error
    with issued.pdf.open("rb") as fh:
        old_bytes = fh.read()
    old_content_hash = issued.content_sha256
    frozen_ids = set(issued.stage_results.values_list("pk", flat=True))
    results = list(StageResult.objects.filter(pk__in=frozen_ids).order_by("stage__stage_number"))
    assert len(results) == 3
    for result, delta in zip(results, (1.0, 2.0, 3.0), strict=True):
        _recomputed(result, round(result.failure_shear_stress_kpa + delta, 3))

    reason = "Failure picks corrected after review of the load readings."
    amendment = services.revision_supersede(user=cast.technician, revision=issued, reason=reason)

    assert amendment.public_id != issued.public_id and amendment.number == 2
    assert amendment.replaces_id == issued.pk
    assert amendment.content["revision"]["replaces"]["label"] == issued.label
    changes = list(RevisionChange.objects.filter(revision=amendment))
    assert sorted(c.item for c in changes) == [
        f"DS-01 stage {n}: shear stress at failure" for n in (1, 2, 3)
    ]
    for change, result, delta in zip(changes, results, (1.0, 2.0, 3.0), strict=True):
        assert change.old_value == f"{result.failure_shear_stress_kpa:.1f} kPa"
        assert change.new_value == f"{result.failure_shear_stress_kpa + delta:.1f} kPa"
        assert change.reason == reason
    # The new revision froze the new rows; the old one still points at the old rows.
    assert set(amendment.stage_results.values_list("pk", flat=True)).isdisjoint(frozen_ids)
    assert set(issued.stage_results.values_list("pk", flat=True)) == frozen_ids

    services.revision_check(user=cast.checker, revision=amendment, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=amendment, password=PASSWORD)
    amendment = issue(amendment, cast.approver, django_capture_on_commit_callbacks)
    assert amendment.state == "issued", amendment.render_error

    old = ReportRevision.objects.get(pk=issued.pk)
    assert old.state == "superseded"
    assert old.content_sha256 == old_content_hash
    with old.pdf.open("rb") as fh:
        assert fh.read() == old_bytes
    assert hashlib.sha256(old_bytes).hexdigest() == old.pdf_sha256
    assert (
        ReportRevision.objects.filter(report=issued.report, state="issued").get().pk == amendment.pk
    )

    with amendment.pdf.open("rb") as fh:
        text = subprocess.run(
            ["pdftotext", "-layout", "-", "-"], input=fh.read(), capture_output=True, check=True
        ).stdout.decode()
    assert f"replaces {issued.label}" in " ".join(text.split())
    assert str(issued.public_id) in text
    assert "Failure picks corrected" in text
