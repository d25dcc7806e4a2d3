"""Benchmark: stage reductions through one real Celery worker, against the service called directly.

Set-up (scratch PostgreSQL database, dropped at the end): the demo, then ``2 x N`` fresh copies
of a demo stage, each in a test set of its own, with the same readings and no result yet (so no
run can reuse an earlier result).

- Baseline, in-process: for N of them, ``stage_reduction_request`` and commit with ``REDIS_URL``
  unset, which runs the reduction (and any follow-up run) on commit in this process.
- Measured: a redis-server of the bench's own on a free port and ONE Celery worker
  (``--concurrency=1``, started by ``scripts/topology.py``); the other N are requested with
  ``REDIS_URL`` set and the clock stops when every run they caused has finished.

Prints jobs per second through the worker and the per-job time ratio (worker / direct).
Target: ratio <= 3. ``--smoke``: N = 2, no target. Stops only the processes it started.

    .venv/bin/python benchmarks/bench_worker.py [--jobs 20] [--smoke]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
import uuid
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
SERVER = os.environ.get("TAULINE_BENCH_PG", "postgres://postgres@127.0.0.1:5432/")
TARGET_RATIO = 3.0


# --- Phases, each in a process of its own (REDIS_URL is read once, at start-up) ----------------


def phase_setup(copies: int) -> dict[str, Any]:
    from django.contrib.auth.models import User
    from django.db import transaction

    from testing.models import ConsolidationReading, ShearStage
    from testing.selectors_readings import shear_columns
    from testing.services import demo
    from testing.services.readings_store import write_shear_columns

    demo.load_demo()
    source = ShearStage.objects.filter(results__isnull=False).order_by("id").first()
    assert source is not None, "the demo has no reduced stage"
    technician = User.objects.get(username="technician")
    shear = shear_columns(source.pk)
    consolidation = list(ConsolidationReading.objects.filter(stage=source))
    ids = []
    for i in range(copies):
        test = source.test
        test.pk = None
        test.id = None
        test.reference = f"DS-W{i:03d}"
        test.released_at = None
        test.created_by = technician
        test._state.adding = True
        test.save()
        specimen = source.specimen
        specimen.pk = None
        specimen.id = None
        specimen.reference = f"W{i:03d}"
        specimen._state.adding = True
        specimen.save()
        stage = ShearStage.objects.get(pk=source.pk)
        stage.pk = None
        stage.id = None
        stage.test = test
        stage.specimen = specimen
        stage._state.adding = True
        stage.save()
        with transaction.atomic():  # the copy's readings, written as column blocks
            write_shear_columns(stage.pk, shear)
        for c in consolidation:
            c.pk = None
            c.stage = stage
        ConsolidationReading.objects.bulk_create(consolidation)
        ids.append(stage.pk)
        source = ShearStage.objects.get(pk=source.pk)  # fresh copies of the source rows
    return {"stages": ids}


def _request_all(ids: list[int]) -> list[int]:
    from django.db import transaction

    from testing.models import ShearStage
    from testing.services import computation

    runs = []
    for stage in ShearStage.objects.filter(pk__in=ids).order_by("id"):
        with transaction.atomic():
            run = computation.stage_reduction_request(stage=stage, user=None, reason="benchmark")
        runs.append(run.pk)
    return runs


def _check(ids: list[int], since: float) -> dict[str, int]:
    from datetime import UTC, datetime

    from django.db.models import Count

    from testing.models import ComputationRun

    runs = ComputationRun.objects.filter(
        requested_at__gte=datetime.fromtimestamp(since, tz=UTC)
    ).filter(stage_id__in=ids) | ComputationRun.objects.filter(
        requested_at__gte=datetime.fromtimestamp(since, tz=UTC), test__stages__in=ids
    )
    return dict(runs.distinct().values_list("state").annotate(n=Count("id")).order_by())


def phase_direct(ids: list[int]) -> dict[str, Any]:
    since = time.time() - 1
    start = time.perf_counter()
    _request_all(ids)  # REDIS_URL unset: each runs on commit, here
    elapsed = time.perf_counter() - start
    return {"elapsed_s": elapsed, "states": _check(ids, since)}


def phase_queued(ids: list[int]) -> dict[str, Any]:
    since = time.time() - 1
    start = time.perf_counter()
    from testing.models import ComputationRun

    run_ids = _request_all(ids)
    submitted = time.perf_counter() - start
    deadline = time.monotonic() + 600
    # A light poll (primary keys only) so the watching costs the worker's database little.
    pending = ComputationRun.objects.filter(pk__in=run_ids, state__in=["queued", "running"])
    while time.monotonic() < deadline and pending.exists():
        time.sleep(0.05)
    elapsed = time.perf_counter() - start
    return {"elapsed_s": elapsed, "submit_s": submitted, "states": _check(ids, since)}


# --- Orchestration -------------------------------------------------------------------------------


def child(phase: str, env: dict[str, str], *args: str) -> dict[str, Any]:
    result = subprocess.run(
        [sys.executable, __file__, "--phase", phase, *args],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
        check=False,
    )
    if result.returncode != 0:
        raise RuntimeError(
            f"phase {phase} failed:\n{result.stdout[-2000:]}\n{result.stderr[-4000:]}"
        )
    data: dict[str, Any] = json.loads(result.stdout.strip().splitlines()[-1])
    return data


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--jobs", type=int, default=20)
    parser.add_argument("--smoke", action="store_true", help="2 jobs, no target")
    parser.add_argument("--phase", choices=["setup", "direct", "queued"])
    parser.add_argument("--ids", default="")
    args = parser.parse_args()
    if args.phase:
        os.environ.setdefault("DJANGO_SETTINGS_MODULE", "labsite.settings")
        import django

        django.setup()
        ids = [int(x) for x in args.ids.split(",") if x]
        if args.phase == "setup":
            out = phase_setup(args.jobs)
        elif args.phase == "direct":
            out = phase_direct(ids)
        else:
            out = phase_queued(ids)
        print(json.dumps(out))
        return 0
    return orchestrate(2 if args.smoke else args.jobs, smoke=args.smoke)


def orchestrate(jobs: int, *, smoke: bool) -> int:
    import psycopg

    from scripts.topology import Topology

    name = f"tauline_bench_worker_{uuid.uuid4().hex[:8]}"
    url = SERVER.rstrip("/") + "/" + name
    admin = psycopg.connect(SERVER.rstrip("/") + "/postgres", autocommit=True)
    admin.execute(f'CREATE DATABASE "{name}"')
    env = {
        **os.environ,
        "DATABASE_URL": url,
        "DJANGO_SETTINGS_MODULE": "labsite.settings",
        "PYTHONUNBUFFERED": "1",
    }
    env.pop("REDIS_URL", None)
    top = Topology(
        web_workers=0,
        celery_workers=1,
        celery_concurrency=1,
        database_url=url,
        load_demo=False,
        migrate=False,  # done just below
    )
    try:
        subprocess.run(
            [sys.executable, "manage.py", "migrate", "--noinput"],
            cwd=ROOT, env=env, check=True, capture_output=True, timeout=600,
        )  # fmt: skip
        stages = child("setup", env, "--jobs", str(2 * jobs))["stages"]
        direct_ids, queued_ids = stages[:jobs], stages[jobs:]
        direct = child("direct", env, "--ids", ",".join(map(str, direct_ids)))
        top.start()
        queued = child("queued", top.env, "--ids", ",".join(map(str, queued_ids)))
    finally:
        top.stop()
        admin.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        admin.close()

    for label, out in (("direct", direct), ("worker", queued)):
        states = out["states"]
        if set(states) - {"succeeded"} or states.get("succeeded", 0) < jobs:
            print(f"bench worker: {label} runs did not all succeed: {states}", file=sys.stderr)
            return 1
    per_direct = direct["elapsed_s"] / jobs
    per_worker = queued["elapsed_s"] / jobs
    ratio = per_worker / per_direct
    print(
        f"# {jobs} stage reductions each way (with any follow-up runs they ask for); "
        f"worker runs: {queued['states']}; requesting them took {queued['submit_s']:.2f} s",
        file=sys.stderr,
    )
    print(
        f"bench worker_stage_reduction: {1000 * per_worker:.0f} ms/job "
        f"({1 / per_worker:.1f} jobs/s through one worker); "
        f"baseline {1000 * per_direct:.0f} ms/job (direct); "
        f"ratio {ratio:.2f} (target <= {TARGET_RATIO:g})"
    )
    ok = smoke or ratio <= TARGET_RATIO
    if not ok:
        print("bench worker: target missed", file=sys.stderr)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
