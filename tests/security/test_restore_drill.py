"""Backup and restore drill on PostgreSQL: back up, restore into a scratch database, verify.

Issue 10 item 6 (a documented backup and restore procedure for PostgreSQL and media, with a drill
that restores into a scratch database and runs the verifier) and ISO/IEC 17025:2017 §7.11
(records protected against loss). Runs the real scripts in subprocesses against 127.0.0.1:5432.
"""

from __future__ import annotations

import os
import secrets
import shutil
import subprocess
import sys
import tempfile
from collections.abc import Iterator
from pathlib import Path

import pytest

pytestmark = [pytest.mark.security, pytest.mark.worker]

ROOT = Path(__file__).resolve().parents[2]
SERVER = os.environ.get("DRILL_PG_URL", "postgres://postgres@127.0.0.1:5432").rstrip("/")
TOOLS = ("pg_dump", "pg_restore", "createdb", "dropdb", "psql")


def _require_postgres() -> None:
    missing = [tool for tool in TOOLS if shutil.which(tool) is None]
    if missing:
        if os.environ.get("CI"):
            pytest.fail(f"CI must have the PostgreSQL client tools; missing: {missing}")
        pytest.skip(f"PostgreSQL client tools missing ({', '.join(missing)}); the drill needs them")
    ready = subprocess.run(
        ["psql", f"{SERVER}/postgres", "-Atc", "select 1"], capture_output=True, timeout=20
    )
    if ready.returncode != 0:
        if os.environ.get("CI"):
            pytest.fail(f"CI must have PostgreSQL at {SERVER}: {ready.stderr!r}")
        pytest.skip(f"no PostgreSQL server at {SERVER}")


def _env(**extra: str) -> dict[str, str]:
    clean = {
        k: v
        for k, v in os.environ.items()
        if not k.startswith(("DJANGO_", "TAULINE_", "DATABASE_URL", "REDIS_URL", "MEDIA_ROOT"))
    }
    return {**clean, "PYTHON": sys.executable, **extra}


def _run(
    args: list[str], env: dict[str, str], timeout: int = 240
) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        args, cwd=ROOT, env=env, capture_output=True, text=True, timeout=timeout, check=False
    )


@pytest.fixture
def source() -> Iterator[tuple[str, Path]]:
    """A fresh PostgreSQL database and media folder holding one issued report."""
    _require_postgres()
    name = f"tauline_drillsrc_{secrets.token_hex(4)}"
    created = _run(["createdb", f"--maintenance-db={SERVER}/postgres", name], _env())
    assert created.returncode == 0, created.stderr
    media = Path(tempfile.mkdtemp(prefix="tauline-drill-src-"))
    try:
        yield f"{SERVER}/{name}", media
    finally:
        _run(["dropdb", "--if-exists", f"--maintenance-db={SERVER}/postgres", name], _env())
        shutil.rmtree(media, ignore_errors=True)


def test_backup_then_restore_drill_verifies_and_catches_a_damaged_pdf(
    source: tuple[str, Path], tmp_path: Path
) -> None:
    url, media = source
    env = _env(DATABASE_URL=url, MEDIA_ROOT=str(media))
    migrated = _run([sys.executable, "manage.py", "migrate", "--noinput"], env)
    assert migrated.returncode == 0, migrated.stderr
    seeded = _run([sys.executable, "tests/security/drill_seed.py"], env)
    assert seeded.returncode == 0, seeded.stdout + seeded.stderr
    label = seeded.stdout.split("seeded ", 1)[1].split(" pdf ")[0]  # "<number> rev 1 revision id N"

    backup = _run(["bash", "scripts/backup.sh", str(tmp_path / "good")], env)
    assert backup.returncode == 0, backup.stderr
    folder = backup.stdout.strip().splitlines()[-1]
    drill = _run(["bash", "scripts/restore-drill.sh", folder], _env())
    assert drill.returncode == 0, drill.stdout + drill.stderr
    assert "ok: 1 issued revision(s)" in drill.stdout
    assert "drill: passed" in drill.stdout

    # The same drill fails, naming the revision, when a stored PDF was damaged before the backup.
    pdf = next((media / "reports").glob("*.pdf"))
    data = bytearray(pdf.read_bytes())
    data[len(data) // 3] ^= 0xFF
    pdf.write_bytes(bytes(data))
    damaged = _run(["bash", "scripts/backup.sh", str(tmp_path / "damaged")], env)
    assert damaged.returncode == 0, damaged.stderr
    drill = _run(
        ["bash", "scripts/restore-drill.sh", damaged.stdout.strip().splitlines()[-1]], _env()
    )
    assert drill.returncode != 0
    revision_name = label.split(" revision id ")[0]
    assert f"FAIL {revision_name}" in drill.stderr, drill.stdout + drill.stderr

    # A backup whose files changed after it was written is refused before anything is restored.
    (Path(folder) / "media.tar.gz").write_bytes(b"not the archive")
    refused = _run(["bash", "scripts/restore-drill.sh", folder], _env())
    assert refused.returncode != 0
    assert "restoring" not in refused.stdout

    # Every scratch database was dropped.
    left = _run(
        [
            "psql",
            f"{SERVER}/postgres",
            "-Atc",
            "select datname from pg_database where datname like 'tauline\\_drill\\_%'",
        ],
        _env(),
    )
    assert left.stdout.strip() == ""
