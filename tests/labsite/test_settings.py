"""Settings refuse to start a production process on a missing or malformed configuration."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _load_settings(**env: str) -> subprocess.CompletedProcess[str]:
    clean = {
        k: v
        for k, v in os.environ.items()
        if not k.startswith(("DJANGO_", "DATABASE_URL", "REDIS_URL"))
    }
    return subprocess.run(
        [
            sys.executable,
            "-c",
            "import django, os; os.environ['DJANGO_SETTINGS_MODULE']='labsite.settings'; "
            "from django.conf import settings; print(settings.DEBUG, settings.CELERY_TASK_ALWAYS_EAGER, "
            "settings.DATABASES['default']['ENGINE'])",
        ],
        cwd=ROOT,
        env={**clean, **env},
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )


def test_production_without_secret_key_stops_with_a_clear_message() -> None:
    result = _load_settings(DJANGO_DEBUG="0")
    assert result.returncode != 0
    assert "DJANGO_SECRET_KEY is not set" in result.stderr


def test_production_with_secret_key_starts() -> None:
    result = _load_settings(DJANGO_DEBUG="0", DJANGO_SECRET_KEY="x" * 60)
    assert result.returncode == 0, result.stderr
    assert result.stdout.split() == ["False", "True", "django.db.backends.sqlite3"]


def test_secret_key_can_come_from_a_file(tmp_path: Path) -> None:
    key_file = tmp_path / "key"
    key_file.write_text("y" * 60)
    result = _load_settings(DJANGO_DEBUG="0", DJANGO_SECRET_KEY_FILE=str(key_file))
    assert result.returncode == 0, result.stderr


def test_malformed_values_name_the_variable() -> None:
    result = _load_settings(DJANGO_DEBUG="maybe")
    assert result.returncode != 0
    assert "DJANGO_DEBUG='maybe'" in result.stderr
    result = _load_settings(DATABASE_URL="nosuchdb://x")
    assert result.returncode != 0
    assert "DATABASE_URL" in result.stderr


def test_defaults_run_on_sqlite_with_eager_tasks_and_redis_switches_to_a_broker() -> None:
    assert _load_settings().stdout.split() == ["True", "True", "django.db.backends.sqlite3"]
    result = _load_settings(
        REDIS_URL="redis://127.0.0.1:1/0", DATABASE_URL="postgres://u@127.0.0.1:5432/x"
    )
    assert result.stdout.split() == ["True", "False", "django.db.backends.postgresql"], (
        result.stderr
    )


def test_every_setting_read_is_documented_in_env_example() -> None:
    import re

    source = (ROOT / "labsite" / "settings.py").read_text(encoding="utf-8")
    read = set(re.findall(r"env_(?:str|bool|int|list)\(\s*\"([A-Z_]+)\"", source))
    documented = {
        line.split("=", 1)[0]
        for line in (ROOT / ".env.example").read_text().splitlines()
        if line and not line.startswith("#")
    }
    assert read, "no settings found: the pattern above no longer matches settings.py"
    assert read - documented == set()
