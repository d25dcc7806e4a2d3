"""Drive computation jobs from a separate process, for the worker fault tests.

Run as ``python -m tests.support.jobs_driver <command>`` with DATABASE_URL / REDIS_URL of the
processes under test; prints one JSON object.

Commands:
  setup N       load the demo and add N more copies of the dense-sand test set (3 stages each)
  submit        queue a reduction of every stage; prints the slowest request time [s]
  submit-one ID queue a reduction of stage ID
  status        run counts per state, result rows, and duplicate checks
  issue-waiting approve and issue the demo's report revision that awaits approval, as the
                approving engineer; prints its id, state and how long the issue request took [s]
  revision ID   the state of report revision ID
"""

from __future__ import annotations

import json
import os
import sys
import time
from decimal import Decimal

import django


def main(argv: list[str]) -> dict[str, object]:
    os.environ.setdefault("DJANGO_SETTINGS_MODULE", "labsite.settings")
    django.setup()
    from django.contrib.auth.models import User
    from django.db.models import Count
    from django.utils import timezone

    from testing.models import ComputationRun, DirectShearTest, Project, ShearStage, StageResult
    from testing.services import computation, demo
    from testing.services.records import sample_receive

    command = argv[0]
    if command == "setup":
        copies = int(argv[1])
        demo.load_demo()
        technician = User.objects.get(username="technician")
        project = Project.objects.get(reference=demo.DEMO_PROJECT_REFERENCE)
        borehole = (
            DirectShearTest.objects.get(reference="DS-01").stages.first().specimen.sample.borehole
        )  # type: ignore[union-attr]
        for i in range(copies):
            sample = sample_receive(
                user=technician,
                borehole=borehole,
                reference=f"BX{i:02d}",
                depth_top_m=Decimal(20 + i),
                depth_base_m=Decimal(20 + i) + Decimal("0.5"),
                sample_type="B",
            )
            demo._sand_set(
                project=project,
                sample=sample,
                user=technician,
                now=timezone.now(),
                reference=f"DS-X{i:02d}",
            )
        return {"stages": ShearStage.objects.count()}
    if command == "submit":
        technician = User.objects.get(username="technician")
        slowest = 0.0
        runs = []
        for stage in ShearStage.objects.select_related("test").order_by("id"):
            started = time.monotonic()
            runs.append(
                computation.stage_reduction_request(
                    stage=stage, user=technician, reason="fault test"
                ).pk
            )
            slowest = max(slowest, time.monotonic() - started)
        return {"runs": runs, "slowest_request_s": slowest}
    if command == "submit-one":
        stage = ShearStage.objects.get(pk=int(argv[1]))
        started = time.monotonic()
        run = computation.stage_reduction_request(stage=stage, user=None, reason="fault test")
        return {"run": run.pk, "request_s": time.monotonic() - started}
    if command == "status":
        runs = ComputationRun.objects.all()
        per_state = dict(runs.values_list("state").annotate(n=Count("id")).order_by())
        duplicate_inputs = (
            StageResult.objects.values("stage_id", "inputs_hash")
            .annotate(n=Count("id"))
            .filter(n__gt=1)
            .count()
        )
        stages_without = ShearStage.objects.filter(results__isnull=True).count()
        return {
            "per_state": per_state,
            "stage_results": StageResult.objects.count(),
            "stages": ShearStage.objects.count(),
            "stages_without_result": stages_without,
            "duplicate_stage_results": duplicate_inputs,
            "max_attempts": max(runs.values_list("attempts", flat=True), default=0),
            "failed": list(
                runs.filter(state="failed").values("id", "stage_id", "attempts", "error")
            ),
        }
    if command == "issue-waiting":
        from django.conf import settings

        from reports import services as report_services
        from reports.models import ReportRevision

        engineer = User.objects.get(username="engineer")
        revision = ReportRevision.objects.get(state="checked")
        password = settings.TAULINE_DEMO_PASSWORD
        report_services.revision_approve(user=engineer, revision=revision, password=password)
        started = time.monotonic()
        report_services.revision_issue(user=engineer, revision=revision, password=password)
        took = time.monotonic() - started
        revision.refresh_from_db()
        return {"revision": revision.pk, "state": revision.state, "issue_request_s": took}
    if command == "revision":
        from reports.models import ReportRevision

        revision = ReportRevision.objects.get(pk=int(argv[1]))
        return {"state": revision.state, "pdf_sha256": revision.pdf_sha256}
    raise SystemExit(f"unknown command {command!r}")


if __name__ == "__main__":
    print(json.dumps(main(sys.argv[1:]), default=str))
