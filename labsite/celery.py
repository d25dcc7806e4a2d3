"""The Celery application. With ``REDIS_URL`` unset, tasks run eagerly in the web process.

Each worker also runs a small heartbeat thread: it marks the worker alive in Redis (read by
``/healthz``) and relays the outbox, so jobs written while the broker was down are sent when it
returns, and runs whose worker died are recovered.
"""

from __future__ import annotations

import logging
import os
import threading
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


@app.task(name="tauline.ping")
def ping() -> str:
    """Round trip check used by the health endpoint and the topology test."""
    return "pong"


def _heartbeat_loop(hostname: str) -> None:
    import redis
    from django.conf import settings
    from django.db import close_old_connections

    from testing.services.computation import relay_once

    interval = settings.TAULINE_WORKER_HEARTBEAT_SECONDS
    client = redis.Redis.from_url(settings.REDIS_URL, socket_timeout=2, socket_connect_timeout=2)
    while not _stop.is_set():
        try:
            client.set(f"{HEARTBEAT_KEY_PREFIX}{hostname}", "alive", ex=interval * 4)
        except redis.RedisError as exc:
            logger.warning("Heartbeat not written: %s", exc)
        try:
            close_old_connections()
            relay_once()
        except Exception:  # the relay must never take the worker down
            logger.exception("Outbox relay pass failed")
        finally:
            close_old_connections()
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


@worker_shutdown.connect
def _stop_heartbeat(**kwargs: Any) -> None:
    _stop.set()
