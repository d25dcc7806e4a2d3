"""The Celery application. With ``REDIS_URL`` unset, tasks run eagerly in the web process.

Each worker also runs a heartbeat thread that marks the worker alive in Redis (read by
``/healthz``), and a child process running ``manage.py relay_outbox --loop``, so jobs written while
the broker was down are sent when it returns and runs whose worker died are recovered. The relay is
a process of its own because publishing from a thread inside the worker would share the worker's
event loop with its consumer.
"""

from __future__ import annotations

import logging
import os
import subprocess
import sys
import threading
from pathlib import Path
from typing import Any

from celery import Celery
from celery.signals import worker_ready, worker_shutdown

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "labsite.settings")

app = Celery("tauline")
app.config_from_object("django.conf:settings", namespace="CELERY")
app.autodiscover_tasks()

logger = logging.getLogger(__name__)
HEARTBEAT_KEY_PREFIX = "tauline:worker:"
_stop = threading.Event()
_relay: list[subprocess.Popen[bytes]] = []


@app.task(name="tauline.ping")
def ping() -> str:
    """Round trip check used by the health endpoint and the topology test."""
    return "pong"


def _heartbeat_loop(hostname: str) -> None:
    import redis
    from django.conf import settings

    interval = settings.TAULINE_WORKER_HEARTBEAT_SECONDS
    client = redis.Redis.from_url(settings.REDIS_URL, socket_timeout=2, socket_connect_timeout=2)
    while not _stop.is_set():
        try:
            client.set(f"{HEARTBEAT_KEY_PREFIX}{hostname}", "alive", ex=interval * 4)
        except redis.RedisError as exc:
            logger.warning("Heartbeat not written: %s", exc)
        _stop.wait(interval)


@worker_ready.connect
def _start_heartbeat(sender: Any = None, **kwargs: Any) -> None:
    from django.conf import settings

    if not settings.REDIS_URL:
        return
    hostname = getattr(sender, "hostname", None) or f"worker-{os.getpid()}"
    threading.Thread(
        target=_heartbeat_loop, args=(hostname,), name="tauline-heartbeat", daemon=True
    ).start()
    manage_py = Path(settings.BASE_DIR) / "manage.py"
    interval = str(settings.TAULINE_WORKER_HEARTBEAT_SECONDS)
    _relay.append(
        subprocess.Popen(
            [sys.executable, str(manage_py), "relay_outbox", "--loop", "--interval", interval]
        )
    )


@worker_shutdown.connect
def _stop_heartbeat(**kwargs: Any) -> None:
    _stop.set()
    for proc in _relay:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
