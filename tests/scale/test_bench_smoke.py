"""Every benchmark script still runs: each at tiny sizes (``--smoke``), bounded in time.

The full sizes and their targets are ``make bench``; here only that the script finishes with
status 0 and prints a well-formed ``bench <name>: <value>; baseline <value>; ratio <r>
(target <= <t>)`` line (the format every benchmark keeps).
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SCRIPTS = sorted((ROOT / "benchmarks").glob("bench_*.py"))
LINE = re.compile(
    r"^bench [\w.-]+: [0-9.]+ [^;]*; baseline [0-9.]+ [^;]*; ratio [0-9.]+ \(target <= [0-9.]+",
    re.MULTILINE,
)
BOUND_S = 60
# Scripts that start their own processes (redis-server, a Celery worker) carry the worker marker;
# starting them (two migrations, the demo, a cold worker) takes most of a minute on a busy 2 vCPU
# machine, so they get twice the bound.
STARTS_PROCESSES = {"bench_worker.py"}


def test_every_benchmark_script_is_covered() -> None:
    assert {p.name for p in SCRIPTS} >= {
        "bench_analysis.py",
        "bench_api.py",
        "bench_dashboard.py",
        "bench_import.py",
        "bench_portal.py",
        "bench_reports.py",
        "bench_worker.py",
    }


@pytest.mark.parametrize(
    "script",
    [
        pytest.param(p, id=p.stem, marks=[pytest.mark.worker] if p.name in STARTS_PROCESSES else [])
        for p in SCRIPTS
    ],
)
def test_benchmark_smoke_run(script: Path) -> None:
    # The scripts make their own scratch databases; they never use the test run's own.
    env = {k: v for k, v in os.environ.items() if k not in {"DATABASE_URL", "REDIS_URL"}}
    result = subprocess.run(
        [sys.executable, str(script), "--smoke"],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        timeout=2 * BOUND_S if script.name in STARTS_PROCESSES else BOUND_S,
        check=False,
    )
    assert result.returncode == 0, (
        f"{script.name}:\n{result.stdout[-3000:]}\n{result.stderr[-3000:]}"
    )
    assert LINE.search(result.stdout), f"no well-formed bench line in:\n{result.stdout[-3000:]}"
