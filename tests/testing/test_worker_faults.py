"""Computation on a bad day, with real processes: a worker killed mid-run, a task that kills its
worker every time, and the broker stopped for 30 s while work is submitted.

Each test uses this module's own redis-server on a free port and a database of its own; the
worker runs ``tests.support.faulty_worker`` (the project's app plus one deliberate crash).
"""

from __future__ import annotations

import json
import os
import random
import signal
import subprocess
import sys
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest

from tests.support.processes import (
    ROOT,
    Processes,
    app_env,
    free_port,
    http_get,
    manage,
    own_database,
    start_redis,
    tails,
    wait_for,
)

pytestmark = [pytest.mark.worker, pytest.mark.timeout(600)]

BIN = Path(sys.executable).parent
EXTRA_SETS = 6  # 2 demo sets + 6 copies = 8 sets, 24 stages


def _set_every_force(value: float, stage_ids: list[int] | None = None) -> str:
    """Shell code setting every shear force reading (of ``stage_ids``, or of all stages) to
    ``value``, straight in the database: each column block decoded, changed and written back."""
    blocks = (
        "B.objects.all()" if stage_ids is None else f"B.objects.filter(stage_id__in={stage_ids})"
    )
    return (
        "import numpy as np; from testing.models import ShearReadingBlock as B\n"
        f"for b in {blocks}:\n"
        f"    f = np.frombuffer(b.force_reading, dtype='<f8').copy(); f[:] = {value!r}\n"
        "    B.objects.filter(pk=b.pk).update(force_reading=f.astype('<f8').tobytes())\n"
    )


@dataclass
class Rig:
    env: dict[str, str]
    procs: Processes
    tmp: Path
    redis_port: int
    redis: subprocess.Popen[bytes] | None = None
    worker: subprocess.Popen[bytes] | None = None
    workers_started: int = 0

    def driver(self, *args: str, timeout: float = 120, **env: str) -> dict[str, Any]:
        result = subprocess.run(
            [sys.executable, "-m", "tests.support.jobs_driver", *args],
            cwd=ROOT,
            env={**self.env, **env},
            capture_output=True,
            text=True,
            timeout=timeout,
            check=False,
        )
        assert result.returncode == 0, (
            f"driver {args} failed:\n{result.stdout}\n{result.stderr}\n{tails(self.procs.logs)}"
        )
        data: dict[str, Any] = json.loads(result.stdout.strip().splitlines()[-1])
        return data

    def start_worker(self) -> None:
        self.workers_started += 1
        self.worker = self.procs.start(
            f"worker{self.workers_started}",
            [
                str(BIN / "celery"),
                "-A",
                "tests.support.faulty_worker",
                "worker",
                "--pool=prefork",
                "--concurrency=2",
                "--loglevel=INFO",
                "--hostname",
                f"fault{self.workers_started}-{os.getpid()}@%h",
            ],
            self.env,
        )

    def kill_worker(self) -> None:
        assert self.worker is not None
        os.killpg(self.worker.pid, signal.SIGKILL)  # the whole worker: parent and pool children
        self.worker.wait(timeout=10)

    def settled(self) -> dict[str, Any]:
        """Wait until no run is queued or running; return the final status."""
        status: dict[str, Any] = {}

        def done() -> bool:
            nonlocal status
            status = self.driver("status")
            return not status["per_state"].get("queued") and not status["per_state"].get("running")

        wait_for("all runs finished", done, 180, [*self.procs.logs, _StatusNote(lambda: status)])  # type: ignore[list-item]
        return status


@pytest.fixture(scope="module")
def rig(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Rig]:
    tmp = tmp_path_factory.mktemp("faults")
    procs = Processes(tmp)
    port = free_port()
    with own_database(tmp) as database_url:
        env = app_env(
            database_url,
            f"redis://127.0.0.1:{port}/0",
            tmp,
            TAULINE_RUN_LEASE_SECONDS="3",
            TAULINE_RUN_REPUBLISH_SECONDS="5",
            TAULINE_WORKER_HEARTBEAT_SECONDS="1",
        )
        rig = Rig(env=env, procs=procs, tmp=tmp, redis_port=port)
        try:
            manage(env, "migrate", "--noinput")
            # The scenario (and the demo's issued report) is built in-process, before any broker exists.
            rig.driver("setup", str(EXTRA_SETS), timeout=300, REDIS_URL="")
            rig.redis = start_redis(procs, tmp, port)
            rig.start_worker()
            yield rig
        finally:
            procs.stop_all()


def test_killed_worker_loses_and_duplicates_nothing(rig: Rig) -> None:
    seed = int(os.environ.get("TAULINE_FAULT_SEED", random.randrange(1_000_000)))
    delay_s = random.Random(seed).uniform(0.5, 4.0)
    submitted = rig.driver("submit")
    assert len(submitted["runs"]) >= 20
    time.sleep(delay_s)
    rig.kill_worker()
    rig.start_worker()
    status = rig.settled()
    context = f"(seed {seed}, killed after {delay_s:.2f} s)"
    assert status["failed"] == [], context
    assert status["stages_without_result"] == 0, context
    assert status["duplicate_stage_results"] == 0, context
    assert status["stage_results"] == status["stages"], context


def test_a_task_that_kills_its_worker_every_time_fails_after_three_deliveries(rig: Rig) -> None:
    manage(
        rig.env,
        "shell",
        "-c",
        "from testing.models import ShearStage; "
        "ShearStage.objects.filter(pk=ShearStage.objects.order_by('id').first().pk).update(notes='CRASH-WORKER')",
    )
    first = rig.driver("status")
    stage_ids = sorted(
        json.loads(
            manage(
                rig.env,
                "shell",
                "-c",
                "import json; from testing.models import ShearStage; print(json.dumps(list(ShearStage.objects.order_by('id').values_list('id', flat=True)[:2])))",
            )
            .stdout.strip()
            .splitlines()[-1]
        )
    )
    # Readings edited so the inputs differ from the stored results: both runs really compute.
    manage(
        rig.env,
        "shell",
        "-c",
        _set_every_force(50.0, stage_ids),
    )
    crash = rig.driver("submit-one", str(stage_ids[0]))["run"]
    healthy = rig.driver("submit-one", str(stage_ids[1]))["run"]
    try:
        status = rig.settled()
    finally:  # the crash marker must not outlive this test
        manage(
            rig.env,
            "shell",
            "-c",
            "from testing.models import ShearStage; ShearStage.objects.filter(notes='CRASH-WORKER').update(notes='')",
        )
    failed = {f["id"]: f for f in status["failed"]}
    assert crash in failed, status
    assert failed[crash]["attempts"] <= 3
    assert "stopped 3 times" in failed[crash]["error"]
    assert healthy not in failed
    assert status["stage_results"] == first["stage_results"] + 1  # the healthy stage only
    assert status["duplicate_stage_results"] == 0


def test_broker_down_for_30_s_answers_fast_and_catches_up(rig: Rig) -> None:
    web_port = free_port()
    rig.procs.start(
        "gunicorn",
        [
            str(BIN / "gunicorn"),
            "labsite.wsgi:application",
            "--bind",
            f"127.0.0.1:{web_port}",
            "--workers",
            "2",
            "--timeout",
            "30",
        ],
        rig.env,
    )
    health = f"http://127.0.0.1:{web_port}/healthz"
    wait_for("gunicorn", lambda: _status_of(health) == "ok", 60, rig.procs.logs)
    manage(
        rig.env,
        "shell",
        "-c",
        _set_every_force(60.0),
    )
    before = rig.driver("status")

    assert rig.redis is not None
    rig.redis.send_signal(signal.SIGTERM)  # our own redis-server only
    rig.redis.wait(timeout=10)
    down_until = time.monotonic() + 30
    health_states: set[str] = set()
    submitted = rig.driver("submit")
    # A report issued meanwhile waits, "being issued", for a report worker; nothing is lost.
    issued = rig.driver("issue-waiting")
    slowest_submit, health_times = submitted["slowest_request_s"], []
    while time.monotonic() < down_until:
        started = time.monotonic()
        health_states.add(_status_of(health))
        health_times.append(time.monotonic() - started)
        time.sleep(1.0)
    rig.redis = start_redis(rig.procs, rig.tmp, rig.redis_port, name="redis-again")

    assert slowest_submit < 2.0, (
        f"slowest submission {slowest_submit:.2f} s while the broker was down"
    )
    assert max(health_times) < 2.0, (
        "slowest /healthz {:.2f} s while the broker was down; all (s): {}".format(
            max(health_times), " ".join(f"{t:.2f}" for t in health_times)
        )
    )
    assert health_states == {"degraded"}
    assert issued["issue_request_s"] < 2.0, issued
    assert issued["state"] == "issuing", issued
    status = rig.settled()
    earlier_failures = {f["id"] for f in before["failed"]}  # e.g. the crash test's run
    assert [f for f in status["failed"] if f["id"] not in earlier_failures] == []
    assert status["duplicate_stage_results"] == 0
    assert status["stage_results"] == before["stage_results"] + status["stages"]
    wait_for("healthz ok again", lambda: _status_of(health) == "ok", 30, rig.procs.logs)
    wait_for(
        "the waiting report issued",
        lambda: rig.driver("revision", str(issued["revision"]))["state"] == "issued",
        120,
        rig.procs.logs,
    )


class _StatusNote:
    """Shows the last run status in a timeout message, beside the process logs."""

    def __init__(self, status: Any) -> None:
        self.name = "run status"
        self._status = status

    def exists(self) -> bool:
        return True

    def read_text(self, errors: str = "") -> str:
        return json.dumps(self._status(), indent=1, default=str)


def _status_of(url: str) -> str:
    try:
        code, body = http_get(url)
    except OSError:
        return "unreachable"
    return str(json.loads(body).get("status")) if code in (200, 503) else f"http {code}"
