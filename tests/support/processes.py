"""Real processes for tests marked ``worker``: free ports, an own database, an own redis-server.

Every process is started in its own session and stopped by its own id; every wait is bounded.
The machine's shared Redis (6379) and PostgreSQL are never stopped.
"""

from __future__ import annotations

import contextlib
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

ROOT = Path(__file__).resolve().parents[2]
BIN = Path(sys.executable).parent  # the virtualenv running this test: gunicorn and celery live here
START_TIMEOUT = 60.0  # importing Django, numpy and scipy in a cold process takes a few seconds
PING_TIMEOUT = 30.0


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        port: int = sock.getsockname()[1]
        return port


def wait_for(what: str, check: Callable[[], bool], timeout: float, logs: list[Path]) -> None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if check():
            return
        time.sleep(0.25)
    pytest.fail(f"{what} not ready within {timeout:.0f} s\n{tails(logs)}")


def tails(logs: list[Path], lines: int = 40) -> str:
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
def own_database(tmp_path: Path) -> Iterator[str]:
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


def http_get(url: str) -> tuple[int, bytes]:
    try:
        with urllib.request.urlopen(url, timeout=5) as response:
            return response.status, response.read()
    except urllib.error.HTTPError as exc:
        return exc.code, exc.read()


def redis_server_path() -> str:
    path = shutil.which("redis-server")
    if path is None:
        message = "redis-server is not installed (apt-get install -y redis-server)"
        if os.environ.get("CI"):
            pytest.fail(message)
        pytest.skip(message)
    return path


def start_redis(
    procs: Processes, directory: Path, port: int, name: str = "redis"
) -> subprocess.Popen[bytes]:
    """A redis-server of the test's own on ``port``: nothing kept on disk."""
    import redis

    proc = procs.start(
        name,
        [
            redis_server_path(),
            "--bind",
            "127.0.0.1",
            "--port",
            str(port),
            "--save",
            "",
            "--appendonly",
            "no",
            "--dir",
            str(directory),
        ],
        dict(os.environ),
    )
    client = redis.Redis(host="127.0.0.1", port=port, socket_timeout=1, socket_connect_timeout=1)

    def up() -> bool:
        try:
            return bool(client.ping())
        except redis.RedisError:
            return False

    wait_for("redis-server", up, 15, procs.logs)
    return proc


def app_env(database_url: str, redis_url: str, tmp_path: Path, **extra: str) -> dict[str, str]:
    """Environment of a production-like process (debug off) on the given database and broker."""
    return {
        **os.environ,
        "DJANGO_SETTINGS_MODULE": "labsite.settings",
        "DATABASE_URL": database_url,
        "REDIS_URL": redis_url,
        "DJANGO_DEBUG": "0",
        "DJANGO_SECRET_KEY": "worker-test-only-secret-key-0123456789abcdefghijklmnop",
        "DJANGO_ALLOWED_HOSTS": "127.0.0.1,localhost",
        "DJANGO_SECURE_COOKIES": "0",  # plain http on loopback: no secure-only cookies,
        "DJANGO_SECURE_SSL_REDIRECT": "0",  # and no redirect to https
        "MEDIA_ROOT": str(tmp_path / "media"),
        "DJANGO_STATIC_ROOT": str(tmp_path / "static"),
        "PYTHONUNBUFFERED": "1",
        **extra,
    }


def manage(
    env: dict[str, str], *args: str, timeout: float = 300
) -> subprocess.CompletedProcess[str]:
    result = subprocess.run(
        [sys.executable, "manage.py", *args],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout,
        check=False,
    )
    assert result.returncode == 0, (
        f"manage.py {' '.join(args)} failed:\n{result.stdout}\n{result.stderr}"
    )
    return result
