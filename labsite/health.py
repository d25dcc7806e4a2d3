"""Liveness and readiness: the database must answer; the broker and workers are reported.

``ok``: everything answers. ``degraded`` (still 200): the broker is down or no worker has sent a
heartbeat lately — pages work, background work waits in the outbox. ``down`` (503): no database.
"""

from __future__ import annotations

import redis
from django.conf import settings
from django.db import connection
from django.http import HttpRequest, JsonResponse
from django.views.decorators.http import require_GET
from redis.backoff import NoBackoff
from redis.retry import Retry

from labsite.celery import HEARTBEAT_KEY_PREFIX


def _broker_and_workers() -> tuple[str, str]:
    if not settings.REDIS_URL:
        return "in-process", "in-process"

    # No client-side retries: a dead broker must make this answer fast, not slowly.
    client = redis.Redis.from_url(
        settings.REDIS_URL, socket_timeout=1, socket_connect_timeout=1, retry=Retry(NoBackoff(), 0)
    )
    try:
        client.ping()
        alive = next(iter(client.scan_iter(match=f"{HEARTBEAT_KEY_PREFIX}*", count=100)), None)
    except redis.RedisError:
        return "down", "unknown"
    return "ok", "ok" if alive is not None else "none"


@require_GET
def healthz(request: HttpRequest) -> JsonResponse:
    checks: dict[str, str] = {}
    try:
        with connection.cursor() as cursor:
            cursor.execute("SELECT 1")
        checks["database"] = "ok"
    except Exception:  # any failure means not ready; the detail goes to the log, not the client
        checks["database"] = "down"
    checks["broker"], checks["workers"] = _broker_and_workers()
    if checks["database"] != "ok":
        status, code = "down", 503
    elif checks["broker"] == "down" or checks["workers"] not in ("ok", "in-process"):
        status, code = "degraded", 200
    else:
        status, code = "ok", 200
    return JsonResponse({"status": status, "checks": checks}, status=code)
