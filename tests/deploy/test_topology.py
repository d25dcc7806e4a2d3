"""The docker-compose topology, proved with real processes on loopback.

The same commands the compose services run (migrate, gunicorn, a Celery worker) are started
as plain processes against their own Redis on a free port and a database of their own, with
``DJANGO_DEBUG`` off as in production. The shared Redis on 6379 is never touched.
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from collections.abc import Callable, Iterator
from pathlib import Path
from urllib.parse import urlsplit

import pytest

pytestmark = pytest.mark.worker

ROOT = Path(__file__).resolve().parents[2]
BIN = Path(sys.executable).parent  # the virtualenv running this test: gunicorn and celery live here
START_TIMEOUT = 60.0  # importing Django, numpy and scipy in a cold process takes a few seconds
PING_TIMEOUT = 30.0


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        port: int = sock.getsockname()[1]
        return port


def _wait_for(what: str, check: Callable[[], bool], timeout: float, logs: list[Path]) -> None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if check():
            return
        time.sleep(0.25)
    pytest.fail(f"{what} not ready within {timeout:.0f} s\n{_tails(logs)}")


def _tails(logs: list[Path], lines: int = 40) -> str:
    out = []
    for log in logs:
        text = log.read_text(errors="replace") if log.exists() else "(no output)"
        out.append(f"--- {log.name} ---\n" + "\n".join(text.splitlines()[-lines:]))
    return "\n".join(out)


class Processes:
    """Processes started by this test; each one is stopped, by its own id, in ``stop_all``."""

    def __init__(self, log_dir: Path) -> None:
        self.log_dir = log_dir
        self.started: list[subprocess.Popen[bytes]] = []
        self.names: list[str] = []
        self.logs: list[Path] = []

    def start(self, name: str, argv: list[str], env: dict[str, str]) -> subprocess.Popen[bytes]:
        log = self.log_dir / f"{name}.log"
        self.logs.append(log)
        with log.open("wb") as out:
            proc = subprocess.Popen(
                argv,
                cwd=ROOT,
                env=env,
                stdin=subprocess.DEVNULL,
                stdout=out,
                stderr=subprocess.STDOUT,
                start_new_session=True,  # its own group: children (gunicorn workers) stop with it
            )
        self.started.append(proc)
        self.names.append(name)
        return proc

    def stop_all(self) -> None:
        for proc in reversed(self.started):
            if proc.poll() is None:
                proc.send_signal(signal.SIGTERM)
        for proc in reversed(self.started):
            try:
                proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                with contextlib.suppress(ProcessLookupError):
                    os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=10)


@contextlib.contextmanager
def _own_database(tmp_path: Path) -> Iterator[str]:
    """A database for the started processes, on the same engine as this test run.

    SQLite: a file under ``tmp_path``. PostgreSQL: a new database on the same server, dropped
    afterwards, so the database behind ``DATABASE_URL`` itself is left alone.
    """
    url = os.environ.get("DATABASE_URL", "")
    if not url or url.startswith("sqlite"):
        yield f"sqlite:///{tmp_path / 'topology.sqlite3'}"
        return
    if not url.startswith(("postgres://", "postgresql://")):
        pytest.fail(f"topology test supports SQLite and PostgreSQL, not {url.split(':')[0]}")

    import dj_database_url
    import psycopg

    params = dj_database_url.parse(url)
    name = f"{params['NAME']}_topology_{os.getpid()}"
    admin = psycopg.connect(
        dbname="postgres",
        user=params.get("USER") or None,
        password=params.get("PASSWORD") or None,
        host=params.get("HOST") or None,
        port=params.get("PORT") or None,
        autocommit=True,
        connect_timeout=10,
    )
    try:
        admin.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        admin.execute(f'CREATE DATABASE "{name}"')
        try:
            yield urlsplit(url)._replace(path=f"/{name}").geturl()
        finally:
            admin.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
    finally:
        admin.close()


def _http_get(url: str) -> tuple[int, bytes]:
    try:
        with urllib.request.urlopen(url, timeout=5) as response:
            return response.status, response.read()
    except urllib.error.HTTPError as exc:
        return exc.code, exc.read()


def test_gunicorn_and_celery_worker_on_redis(tmp_path: Path) -> None:
    redis_server = shutil.which("redis-server")
    if redis_server is None:
        message = "redis-server is not installed (apt-get install -y redis-server)"
        if os.environ.get("CI"):
            pytest.fail(message)
        pytest.skip(message)

    import redis
    from celery import Celery

    redis_port, web_port = _free_port(), _free_port()
    redis_url = f"redis://127.0.0.1:{redis_port}/0"
    procs = Processes(tmp_path)
    client: Celery | None = None

    with _own_database(tmp_path) as database_url:
        env = {
            **os.environ,
            "DJANGO_SETTINGS_MODULE": "labsite.settings",
            "DATABASE_URL": database_url,
            "REDIS_URL": redis_url,
            "DJANGO_DEBUG": "0",
            "DJANGO_SECRET_KEY": "topology-test-only-secret-key-0123456789abcdefghijklmnop",
            "DJANGO_ALLOWED_HOSTS": "127.0.0.1,localhost",
            "MEDIA_ROOT": str(tmp_path / "media"),
            "DJANGO_STATIC_ROOT": str(tmp_path / "static"),
            "PYTHONUNBUFFERED": "1",
        }
        try:
            # The one-shot migrate service.
            migrate = subprocess.run(
                [sys.executable, "manage.py", "migrate", "--noinput"],
                cwd=ROOT,
                env=env,
                capture_output=True,
                text=True,
                timeout=300,
                check=False,
            )
            assert migrate.returncode == 0, migrate.stdout + migrate.stderr

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

            _wait_for("redis-server", redis_up, 15, procs.logs)

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
                        pytest.fail(f"{name} exited early\n{_tails(procs.logs)}")
                try:
                    return _http_get(health_url)[0] != 0
                except OSError:
                    return False

            _wait_for("gunicorn", web_up, START_TIMEOUT, procs.logs)
            status, body = _http_get(health_url)
            assert status == 200, f"{status} {body!r}\n{_tails(procs.logs)}"
            health = json.loads(body)
            assert health.get("status") == "ok", health

            client = Celery("topology-client", broker=redis_url, backend=redis_url)
            celery_client = client

            def worker_up() -> bool:
                return bool(celery_client.control.ping(timeout=1.0))

            _wait_for("celery worker", worker_up, START_TIMEOUT, procs.logs)
            result = client.send_task("tauline.ping")
            try:
                reply = result.get(timeout=PING_TIMEOUT)
            except Exception as exc:  # a timeout or a task error: show what the worker said
                pytest.fail(f"tauline.ping gave no reply: {exc!r}\n{_tails(procs.logs)}")
            assert reply == "pong"
        finally:
            if client is not None:
                client.close()
            procs.stop_all()
