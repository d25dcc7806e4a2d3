"""Two Celery workers share stage reductions without duplicates (the scale-out topology).

The topology script starts the compose processes on loopback (own redis-server, own scratch
PostgreSQL database, gunicorn, two Celery workers); 30 stage reductions are queued through the
service; each worker's own log must show reductions it carried out, every run must succeed once,
and no stage may get two results for the same inputs.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from scripts.topology import ROOT, Topology, TopologyError, tail

pytestmark = [pytest.mark.worker, pytest.mark.timeout(600)]

N_RUNS = 30
SUCCEEDED = re.compile(r"Task tauline\.run_computation\[([0-9a-f-]+)\] succeeded")


@pytest.fixture(scope="module")
def topology(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Topology]:
    top = Topology(
        web_workers=1,
        celery_workers=2,
        log_dir=tmp_path_factory.mktemp("scale"),
        load_demo=False,  # the driver loads it, so that every stage is counted below
    )
    try:
        top.start()
    except TopologyError as exc:
        pytest.fail(str(exc))
    try:
        yield top
    finally:
        top.stop()


def driver(top: Topology, *args: str, timeout: float = 300) -> dict[str, Any]:
    result = subprocess.run(
        [sys.executable, "-m", "tests.support.jobs_driver", *args],
        cwd=ROOT,
        env=top.env,
        capture_output=True,
        text=True,
        timeout=timeout,
        check=False,
    )
    assert result.returncode == 0, f"driver {args}:\n{result.stderr}\n{tail(top.logs)}"
    data: dict[str, Any] = json.loads(result.stdout.strip().splitlines()[-1])
    return data


def settled(top: Topology, timeout_s: float = 240) -> dict[str, Any]:
    deadline = time.monotonic() + timeout_s
    status: dict[str, Any] = {}
    while time.monotonic() < deadline:
        status = driver(top, "status")
        if not status["per_state"].get("queued") and not status["per_state"].get("running"):
            return status
        time.sleep(1)
    pytest.fail(f"runs still pending after {timeout_s:.0f} s: {status}\n{tail(top.logs)}")


def succeeded_tasks(log: Path) -> list[str]:
    return SUCCEEDED.findall(log.read_text(errors="replace"))


def test_two_workers_share_30_reductions_without_duplicates(topology: Topology) -> None:
    demo_stages = driver(topology, "setup", "0")["stages"]
    copies = max(0, -(-(N_RUNS - demo_stages) // 3))  # 3 stages per copied test set
    stages = driver(topology, "setup", str(copies))["stages"]
    assert stages >= N_RUNS
    settled(topology)  # the demo's own first reductions
    before = [len(succeeded_tasks(topology.worker_log(i))) for i in (1, 2)]

    runs = driver(topology, "submit")["runs"]
    assert len(runs) == stages >= N_RUNS
    status = settled(topology)

    after = [len(succeeded_tasks(topology.worker_log(i))) for i in (1, 2)]
    done = [a - b for a, b in zip(after, before, strict=True)]
    assert all(n > 0 for n in done), f"a worker did nothing: {done}\n{tail(topology.logs)}"
    assert sum(done) >= len(runs)
    assert status["failed"] == []
    assert status["stages_without_result"] == 0
    assert status["duplicate_stage_results"] == 0
    # No task ran to completion on both workers.
    one, two = (set(succeeded_tasks(topology.worker_log(i))) for i in (1, 2))
    assert one.isdisjoint(two)
