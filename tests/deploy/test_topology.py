"""The docker-compose topology, proved with real processes on loopback.

The same commands the compose services run (migrate, gunicorn, a Celery worker) are started
as plain processes against their own Redis on a free port and a database of their own, with
``DJANGO_DEBUG`` off as in production. The shared Redis on 6379 is never touched.
"""

from __future__ import annotations

import json
import os
import sys
from pathlib import Path

import pytest

from tests.support.processes import (
    Processes,
    free_port,
    http_get,
    manage,
    own_database,
    redis_server_path,
    tails,
    wait_for,
)

pytestmark = pytest.mark.worker

BIN = Path(sys.executable).parent  # the virtualenv running this test: gunicorn and celery live here
START_TIMEOUT = 60.0  # importing Django, numpy and scipy in a cold process takes a few seconds
PING_TIMEOUT = 30.0


def test_gunicorn_and_celery_worker_on_redis(tmp_path: Path) -> None:
    redis_server = redis_server_path()

    import redis
    from celery import Celery

    redis_port, web_port = free_port(), free_port()
    redis_url = f"redis://127.0.0.1:{redis_port}/0"
    procs = Processes(tmp_path)
    client: Celery | None = None

    with own_database(tmp_path) as database_url:
        env = {
            **os.environ,
            "DJANGO_SETTINGS_MODULE": "labsite.settings",
            "DATABASE_URL": database_url,
            "REDIS_URL": redis_url,
            "DJANGO_DEBUG": "0",
            "DJANGO_SECRET_KEY": "topology-test-only-secret-key-0123456789abcdefghijklmnop",
            "DJANGO_ALLOWED_HOSTS": "127.0.0.1,localhost",
            "DJANGO_SECURE_SSL_REDIRECT": "0",  # plain http on loopback: no redirect to https
            "MEDIA_ROOT": str(tmp_path / "media"),
            "DJANGO_STATIC_ROOT": str(tmp_path / "static"),
            "PYTHONUNBUFFERED": "1",
        }
        try:
            manage(env, "migrate", "--noinput")  # the one-shot migrate service
            procs.start(
                "redis",
                [
                    redis_server,
                    "--bind", "127.0.0.1",
                    "--port", str(redis_port),
                    "--save", "",
                    "--appendonly", "no",
                    "--dir", str(tmp_path),
                ],
                env,
            )  # fmt: skip
            broker = redis.Redis.from_url(redis_url, socket_timeout=1, socket_connect_timeout=1)

            def redis_up() -> bool:
                try:
                    return bool(broker.ping())
                except redis.RedisError:
                    return False

            wait_for("redis-server", redis_up, 15, procs.logs)

            procs.start(
                "gunicorn",
                [
                    str(BIN / "gunicorn"), "labsite.wsgi:application",
                    "--bind", f"127.0.0.1:{web_port}",
                    "--workers", "2",
                    "--timeout", "60",
                ],
                env,
            )  # fmt: skip
            procs.start(
                "celery",
                [
                    str(BIN / "celery"), "-A", "labsite", "worker",
                    "--pool=solo", "--loglevel=INFO",
                    "--hostname", f"topology-{os.getpid()}@%h",
                ],
                env,
            )  # fmt: skip

            health_url = f"http://127.0.0.1:{web_port}/healthz"

            def web_up() -> bool:
                for name, proc in zip(procs.names, procs.started, strict=True):
                    if proc.poll() is not None:
                        pytest.fail(f"{name} exited early\n{tails(procs.logs)}")
                try:
                    return http_get(health_url)[0] != 0
                except OSError:
                    return False

            wait_for("gunicorn", web_up, START_TIMEOUT, procs.logs)
            client = Celery("topology-client", broker=redis_url, backend=redis_url)
            celery_client = client

            def worker_up() -> bool:
                return bool(celery_client.control.ping(timeout=1.0))

            wait_for("celery worker", worker_up, START_TIMEOUT, procs.logs)
            result = client.send_task("tauline.ping")
            try:
                reply = result.get(timeout=PING_TIMEOUT)
            except Exception as exc:  # a timeout or a task error: show what the worker said
                pytest.fail(f"tauline.ping gave no reply: {exc!r}\n{tails(procs.logs)}")
            assert reply == "pong"

            # With a worker running, its heartbeat turns /healthz from "degraded" to "ok".
            def healthy() -> bool:
                status, body = http_get(health_url)
                return status == 200 and json.loads(body).get("status") == "ok"

            wait_for("healthz ok (worker heartbeat)", healthy, 30, procs.logs)
            health = json.loads(http_get(health_url)[1])
            assert health["checks"] == {"database": "ok", "broker": "ok", "workers": "ok"}, health
        finally:
            if client is not None:
                client.close()
            procs.stop_all()
