"""/healthz: ok in-process; degraded (still 200, answered fast) when the broker is unreachable."""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import pytest
from django.test import Client

from tests.support.processes import free_port


@pytest.mark.django_db
def test_in_process_install_is_ok(settings: Any) -> None:
    settings.REDIS_URL = ""  # CI runs the suite with a broker configured; this is the embedded case
    response = Client().get("/healthz")
    assert response.status_code == 200
    assert response.json() == {
        "status": "ok",
        "checks": {"database": "ok", "broker": "in-process", "workers": "in-process"},
    }


@pytest.mark.django_db
def test_unreachable_broker_is_degraded_and_answers_within_two_seconds(settings: Any) -> None:
    settings.REDIS_URL = f"redis://127.0.0.1:{free_port()}/0"  # nothing listens there
    started = time.monotonic()
    response = Client().get("/healthz")
    assert time.monotonic() - started < 2.0
    assert response.status_code == 200
    assert response.json()["status"] == "degraded"
    assert response.json()["checks"]["broker"] == "down"


def test_a_booted_wsgi_worker_has_its_views_loaded_before_the_first_request() -> None:
    """gunicorn imports labsite.wsgi when a worker boots; the views must be imported then, so the
    worker's first request (often a health probe) does not pay for loading the URLconf."""
    root = Path(__file__).resolve().parents[2]
    env = {k: v for k, v in os.environ.items() if k != "DJANGO_SETTINGS_MODULE"}
    result = subprocess.run(
        [
            sys.executable,
            "-c",
            "import sys, labsite.wsgi; "
            "print(' '.join(m for m in ('labsite.urls', 'labsite.health', 'testing.views') if m in sys.modules))",
        ],
        cwd=root,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert result.returncode == 0, result.stderr
    assert result.stdout.split() == ["labsite.urls", "labsite.health", "testing.views"]
