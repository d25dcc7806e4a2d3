"""Production configuration: `check --deploy` is clean and the cookies are locked down.

Reliability plan rows "config" (`manage.py check --deploy --fail-level WARNING` with production
settings → exit 0) and "headers" (secure, HttpOnly, SameSite cookies). The checks themselves are
Django's own deployment checklist (Django documentation, "Deployment checklist").
"""

from __future__ import annotations

import json
import os
import secrets
import subprocess
import sys
from pathlib import Path

import pytest

pytestmark = pytest.mark.security

ROOT = Path(__file__).resolve().parents[2]


def production_env(**extra: str) -> dict[str, str]:
    clean = {
        k: v
        for k, v in os.environ.items()
        if not k.startswith(("DJANGO_", "TAULINE_", "DATABASE_URL", "REDIS_URL"))
    }
    return {
        **clean,
        "DJANGO_DEBUG": "0",
        "DJANGO_SECRET_KEY": secrets.token_urlsafe(50),
        "DJANGO_ALLOWED_HOSTS": "lab.example.org",
        "DJANGO_HSTS_SECONDS": "31536000",
        "DJANGO_SECURE_SSL_REDIRECT": "1",
        **extra,
    }


def _run(args: list[str], env: dict[str, str]) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, *args], cwd=ROOT, env=env, capture_output=True, text=True, timeout=120
    )


def test_check_deploy_passes_with_production_settings() -> None:
    result = _run(["manage.py", "check", "--deploy", "--fail-level", "WARNING"], production_env())
    assert result.returncode == 0, result.stdout + result.stderr
    assert "no issues" in result.stdout


def test_check_deploy_fails_when_hsts_is_left_off() -> None:
    """The check is not vacuous: production without HSTS is reported."""
    result = _run(
        ["manage.py", "check", "--deploy", "--fail-level", "WARNING"],
        production_env(DJANGO_HSTS_SECONDS="0"),
    )
    assert result.returncode != 0
    assert "security.W004" in result.stdout + result.stderr


_PRINT_SETTINGS = """
import json, os
os.environ["DJANGO_SETTINGS_MODULE"] = "labsite.settings"
import django
django.setup()
from django.conf import settings as s
print(json.dumps({name: getattr(s, name) for name in [
    "SESSION_COOKIE_SECURE", "SESSION_COOKIE_HTTPONLY", "SESSION_COOKIE_SAMESITE",
    "CSRF_COOKIE_SECURE", "CSRF_COOKIE_SAMESITE", "SECURE_HSTS_SECONDS",
    "SECURE_HSTS_INCLUDE_SUBDOMAINS", "SECURE_SSL_REDIRECT", "SECURE_PROXY_SSL_HEADER",
    "SECURE_CONTENT_TYPE_NOSNIFF", "SECURE_REFERRER_POLICY", "X_FRAME_OPTIONS", "DEBUG",
    "SESSION_COOKIE_AGE",
]}))
"""


def test_production_settings_lock_the_cookies_down() -> None:
    result = _run(["-c", _PRINT_SETTINGS], production_env())
    assert result.returncode == 0, result.stderr
    values = json.loads(result.stdout.strip().splitlines()[-1])
    assert values["DEBUG"] is False
    assert values["SESSION_COOKIE_SECURE"] is True and values["CSRF_COOKIE_SECURE"] is True
    assert values["SESSION_COOKIE_HTTPONLY"] is True
    assert values["SESSION_COOKIE_SAMESITE"] == "Lax" and values["CSRF_COOKIE_SAMESITE"] == "Lax"
    assert values["SECURE_HSTS_SECONDS"] == 31536000
    assert values["SECURE_HSTS_INCLUDE_SUBDOMAINS"] is True
    assert values["SECURE_SSL_REDIRECT"] is True
    assert values["SECURE_PROXY_SSL_HEADER"] == ["HTTP_X_FORWARDED_PROTO", "https"]
    assert values["SECURE_CONTENT_TYPE_NOSNIFF"] is True
    assert values["SECURE_REFERRER_POLICY"] == "same-origin"
    assert values["X_FRAME_OPTIONS"] == "DENY"
    assert values["SESSION_COOKIE_AGE"] == 12 * 3600  # the absolute session limit's default
