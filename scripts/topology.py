"""The docker-compose topology without Docker: the same processes, on loopback.

Starts, in order: a redis-server of its own on a free port, a database (a scratch PostgreSQL
database created with ``createdb`` on 127.0.0.1:5432 as user ``postgres`` and dropped at the end,
or the ``--database-url`` / ``DATABASE_URL`` given, which is left in place), ``migrate`` (the
compose one-shot service), ``collectstatic`` (done at image build in the Dockerfile), ``loaddemo``,
gunicorn with N workers and M Celery workers (each ``--concurrency=2`` as in the compose file).
It prints the URL and stops everything it started, by process group id, on Ctrl-C or exit.

    .venv/bin/python scripts/topology.py [--web-workers 3] [--celery-workers 2]

Importable: ``with Topology(web_workers=3, celery_workers=2) as top: top.url`` — used by the load
test and the scale tests. The machine's shared Redis (6379) and PostgreSQL are never stopped.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request
import uuid
from collections.abc import Callable
from pathlib import Path
from types import TracebackType

ROOT = Path(__file__).resolve().parents[1]
BIN = Path(sys.executable).parent  # the virtualenv running this script: gunicorn and celery
PG_ARGS = ["-h", "127.0.0.1", "-p", "5432", "-U", "postgres"]
START_TIMEOUT_S = 90.0  # a cold Django + numpy + scipy import takes a few seconds per process


# Collected (hashed, compressed) static files, kept between runs: compressing them takes a minute.
STATIC_DIR = ROOT / "var" / "topology-static"
STATIC_SOURCES = [
    ROOT / "pyproject.toml",
    BIN.parent / ".installed",  # the packages' own static files (admin, API docs)
    ROOT / "static",
    ROOT / "testing",
    ROOT / "reports",
]


def _static_fresh() -> bool:
    """True if the collected files are newer than every static source and installed package."""
    manifest = STATIC_DIR / "staticfiles.json"
    if not manifest.exists():
        return False
    built = manifest.stat().st_mtime
    for source in STATIC_SOURCES:
        if source.is_file() and source.stat().st_mtime > built:
            return False
        if source.is_dir():
            for path in (
                source.rglob("static/**/*") if source.name != "static" else source.rglob("*")
            ):
                if path.is_file() and path.stat().st_mtime > built:
                    return False
    return True


class TopologyError(RuntimeError):
    """A process did not start; the message carries the tail of its log."""


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        port: int = sock.getsockname()[1]
        return port


def wait_until(what: str, check: Callable[[], bool], timeout_s: float, logs: list[Path]) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if check():
            return
        time.sleep(0.25)
    raise TopologyError(f"{what} not ready within {timeout_s:.0f} s\n{tail(logs)}")


def tail(logs: list[Path], lines: int = 30) -> str:
    out = []
    for log in logs:
        text = log.read_text(errors="replace") if log.exists() else "(no output)"
        out.append(f"--- {log.name} ---\n" + "\n".join(text.splitlines()[-lines:]))
    return "\n".join(out)


def http_status(url: str) -> int:
    try:
        with urllib.request.urlopen(url, timeout=5) as response:
            status: int = response.status
            return status
    except urllib.error.HTTPError as exc:
        return exc.code
    except OSError:
        return 0


class Topology:
    """Redis, a database, gunicorn and Celery workers as child processes of this one.

    ``extra_env`` is added to every process's environment (e.g. a higher API throttle rate for
    the load test). ``log_dir`` keeps the logs (one file per process); a temporary folder if unset.
    """

    def __init__(
        self,
        *,
        web_workers: int = 3,
        celery_workers: int = 2,
        database_url: str | None = None,
        log_dir: Path | None = None,
        extra_env: dict[str, str] | None = None,
        load_demo: bool = True,
        celery_concurrency: int = 2,
        migrate: bool = True,
    ) -> None:
        self.web_workers = web_workers
        self.celery_workers = celery_workers
        self.given_database_url = database_url
        self.dir = log_dir or Path(tempfile.mkdtemp(prefix="tauline-topology-"))
        self.dir.mkdir(parents=True, exist_ok=True)
        self.extra_env = extra_env or {}
        self.load_demo = load_demo
        self.celery_concurrency = celery_concurrency
        self.migrate = migrate
        self.procs: list[tuple[str, subprocess.Popen[bytes]]] = []
        self.logs: list[Path] = []
        self.scratch_db: str | None = None
        self.redis_port = free_port()
        self.web_port = free_port()
        self.url = f"http://127.0.0.1:{self.web_port}"
        self.redis_url = f"redis://127.0.0.1:{self.redis_port}/0"
        self.database_url = ""
        self.env: dict[str, str] = {}

    # --- processes --------------------------------------------------------------------------
    def _start(self, name: str, argv: list[str]) -> subprocess.Popen[bytes]:
        log = self.dir / f"{name}.log"
        self.logs.append(log)
        with log.open("wb") as out:
            proc = subprocess.Popen(
                argv,
                cwd=ROOT,
                env=self.env,
                stdin=subprocess.DEVNULL,
                stdout=out,
                stderr=subprocess.STDOUT,
                start_new_session=True,  # its own group: gunicorn/celery children stop with it
            )
        self.procs.append((name, proc))
        return proc

    def manage(self, *args: str, timeout_s: float = 300) -> str:
        result = subprocess.run(
            [sys.executable, "manage.py", *args],
            cwd=ROOT,
            env=self.env,
            capture_output=True,
            text=True,
            timeout=timeout_s,
            check=False,
        )
        if result.returncode != 0:
            raise TopologyError(
                f"manage.py {' '.join(args)} failed:\n{result.stdout}\n{result.stderr}"
            )
        return result.stdout

    def worker_log(self, index: int) -> Path:
        return self.dir / f"celery{index}.log"

    def worker_hostname(self, index: int) -> str:
        return f"tauline{index}-{self.web_port}@127.0.0.1"

    # --- life cycle -------------------------------------------------------------------------
    def start(self) -> Topology:
        try:
            self._start_all()
        except BaseException:
            self.stop()
            raise
        return self

    def _start_all(self) -> None:
        redis_server = shutil.which("redis-server")
        if redis_server is None:
            raise TopologyError("redis-server is not installed (apt-get install -y redis-server)")
        url = self.given_database_url or ""
        if not url:
            self.scratch_db = f"tauline_topology_{uuid.uuid4().hex[:8]}"
            subprocess.run(["createdb", *PG_ARGS, self.scratch_db], check=True, timeout=60)
            url = f"postgres://postgres@127.0.0.1:5432/{self.scratch_db}"
        self.database_url = url
        self.env = {
            **os.environ,
            "DJANGO_SETTINGS_MODULE": "labsite.settings",
            "DATABASE_URL": url,
            "REDIS_URL": self.redis_url,
            "DJANGO_DEBUG": "0",
            "DJANGO_SECRET_KEY": os.environ.get("DJANGO_SECRET_KEY")
            or "topology-only-secret-key-" + uuid.uuid4().hex + uuid.uuid4().hex,
            "DJANGO_ALLOWED_HOSTS": "127.0.0.1,localhost",
            "DJANGO_SECURE_COOKIES": "0",  # plain http on loopback: no secure-only cookies,
            "DJANGO_SECURE_SSL_REDIRECT": "0",  # and no redirect to https
            "MEDIA_ROOT": str(self.dir / "media"),
            "DJANGO_STATIC_ROOT": str(STATIC_DIR),
            "PYTHONUNBUFFERED": "1",
            **self.extra_env,
        }

        self._start(
            "redis",
            [
                redis_server,
                "--bind", "127.0.0.1",
                "--port", str(self.redis_port),
                "--save", "",
                "--appendonly", "no",
                "--dir", str(self.dir),
            ],
        )  # fmt: skip
        import redis

        client = redis.Redis.from_url(self.redis_url, socket_timeout=1, socket_connect_timeout=1)

        def redis_up() -> bool:
            try:
                return bool(client.ping())
            except redis.RedisError:
                return False

        wait_until("redis-server", redis_up, 15, self.logs)

        if self.migrate:
            self.manage("migrate", "--noinput")
        if not _static_fresh():
            self.manage("collectstatic", "--noinput", timeout_s=600)
        if self.load_demo:
            self.manage("loaddemo")

        if self.web_workers:
            self._start(
                "gunicorn",
                [
                    str(BIN / "gunicorn"),
                    "labsite.wsgi:application",
                    "--bind", f"127.0.0.1:{self.web_port}",
                    "--workers", str(self.web_workers),
                    "--access-logfile", "-",
                ],
            )  # fmt: skip
        for i in range(1, self.celery_workers + 1):
            self._start(
                f"celery{i}",
                [
                    str(BIN / "celery"),
                    "-A", "labsite",
                    "worker",
                    "--loglevel=INFO",
                    f"--concurrency={self.celery_concurrency}",
                    "--hostname", self.worker_hostname(i),
                ],
            )  # fmt: skip
        self._check_alive()
        if self.web_workers:
            wait_until(
                "gunicorn",
                lambda: http_status(self.url + "/healthz") == 200,
                START_TIMEOUT_S,
                self.logs,
            )
        if self.celery_workers:
            wait_until("celery workers", self._workers_ready, START_TIMEOUT_S, self.logs)

    def _workers_ready(self) -> bool:
        self._check_alive()
        return all(
            "ready." in self.worker_log(i).read_text(errors="replace")
            for i in range(1, self.celery_workers + 1)
            if self.worker_log(i).exists()
        )

    def _check_alive(self) -> None:
        for name, proc in self.procs:
            if proc.poll() is not None:
                raise TopologyError(f"{name} exited with {proc.returncode}\n{tail(self.logs)}")

    def stop(self) -> None:
        """Stop every process this topology started, by its own group id; drop the scratch DB."""
        for _, proc in reversed(self.procs):
            if proc.poll() is None:
                with contextlib.suppress(ProcessLookupError):
                    os.killpg(proc.pid, signal.SIGTERM)
        for _, proc in reversed(self.procs):
            try:
                proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                with contextlib.suppress(ProcessLookupError):
                    os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=10)
        self.procs.clear()
        if self.scratch_db:
            subprocess.run(
                ["dropdb", "--if-exists", "--force", *PG_ARGS, self.scratch_db],
                check=False,
                timeout=60,
            )
            self.scratch_db = None

    def __enter__(self) -> Topology:
        return self.start()

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.stop()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--web-workers", type=int, default=3)
    parser.add_argument("--celery-workers", type=int, default=2)
    parser.add_argument("--database-url", default=os.environ.get("DATABASE_URL") or None)
    parser.add_argument("--log-dir", type=Path, default=None)
    args = parser.parse_args(argv)
    if args.database_url and not args.database_url.startswith(("postgres://", "postgresql://")):
        parser.error("the topology runs on PostgreSQL; give a postgres:// URL or none")

    def on_term(signum: int, frame: object) -> None:
        raise KeyboardInterrupt

    signal.signal(signal.SIGTERM, on_term)
    top = Topology(
        web_workers=args.web_workers,
        celery_workers=args.celery_workers,
        database_url=args.database_url,
        log_dir=args.log_dir,
    )
    try:
        top.start()
        print(f"Tauline at {top.url}  (logs in {top.dir}; Ctrl-C stops everything)", flush=True)
        while True:
            time.sleep(1)
            top._check_alive()
    except KeyboardInterrupt:
        return 0
    finally:
        top.stop()


if __name__ == "__main__":
    sys.exit(main())
