"""Liveness and readiness: the database must answer; the broker is reported, not required."""

from __future__ import annotations

from django.conf import settings
from django.db import connection
from django.http import HttpRequest, JsonResponse
from django.views.decorators.http import require_GET


@require_GET
def healthz(request: HttpRequest) -> JsonResponse:
    checks: dict[str, str] = {}
    try:
        with connection.cursor() as cursor:
            cursor.execute("SELECT 1")
        checks["database"] = "ok"
    except Exception:  # any failure means not ready; the detail goes to the log, not the client
        checks["database"] = "down"
    if settings.REDIS_URL:
        import redis

        try:
            redis.Redis.from_url(
                settings.REDIS_URL, socket_timeout=1, socket_connect_timeout=1
            ).ping()
            checks["broker"] = "ok"
        except redis.RedisError:
            checks["broker"] = "down"
    else:
        checks["broker"] = "in-process"
    if checks["database"] != "ok":
        status, code = "down", 503
    elif checks["broker"] == "down":
        status, code = "degraded", 200
    else:
        status, code = "ok", 200
    return JsonResponse({"status": status, "checks": checks}, status=code)
