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


def _without_app_settings() -> dict[str, str]:
    return {
        k: v
        for k, v in os.environ.items()
        if not k.startswith(("DJANGO_", "TAULINE_", "DATABASE_URL", "REDIS_URL"))
    }


def production_env(database_url: str, **extra: str) -> dict[str, str]:
    """Only what production requires (debug off, secret key, host names) and a database.

    No security setting is given here: HSTS, the HTTPS redirect and secure cookies must be on
    by default once debug is off.
    """
    return {
        **_without_app_settings(),
        "DJANGO_DEBUG": "0",
        "DJANGO_SECRET_KEY": secrets.token_urlsafe(50),
        "DJANGO_ALLOWED_HOSTS": "lab.example.org",
        "DATABASE_URL": database_url,
        **extra,
    }


@pytest.fixture
def database_url(tmp_path: Path) -> str:
    return f"sqlite:///{tmp_path / 'deploy.sqlite3'}"


def _env_example() -> dict[str, str]:
    """The variables .env.example sets, as `KEY=value` lines (comments and blanks skipped)."""
    values: dict[str, str] = {}
    for line in (ROOT / ".env.example").read_text(encoding="utf-8").splitlines():
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        key, sep, value = line.partition("=")
        assert sep, f".env.example line is not KEY=value: {line!r}"
        values[key.strip()] = value.strip()
    return values


def _run(args: list[str], env: dict[str, str]) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, *args], cwd=ROOT, env=env, capture_output=True, text=True, timeout=120
    )


CHECK_DEPLOY = ["manage.py", "check", "--deploy", "--fail-level", "WARNING"]


def test_check_deploy_passes_with_only_the_required_settings(database_url: str) -> None:
    result = _run(CHECK_DEPLOY, production_env(database_url))
    assert result.returncode == 0, result.stdout + result.stderr
    assert "no issues" in result.stdout


def test_check_deploy_passes_with_the_env_example_values(database_url: str) -> None:
    """.env.example, switched to production as its comments say (debug off, a secret key)."""
    example = _env_example()
    # The security switches are spelled out there, so this check covers their shipped values.
    assert {"DJANGO_SECURE_SSL_REDIRECT", "DJANGO_HSTS_SECONDS", "DJANGO_SECURE_COOKIES"} <= set(
        example
    )
    env = {
        **_without_app_settings(),
        **example,
        "DJANGO_DEBUG": "0",
        "DJANGO_SECRET_KEY": secrets.token_urlsafe(50),
        "DATABASE_URL": database_url,
    }
    result = _run(CHECK_DEPLOY, env)
    assert result.returncode == 0, result.stdout + result.stderr
    assert "no issues" in result.stdout


def test_check_deploy_fails_when_hsts_is_left_off(database_url: str) -> None:
    """The check is not vacuous: production without HSTS is reported."""
    result = _run(CHECK_DEPLOY, production_env(database_url, DJANGO_HSTS_SECONDS="0"))
    assert result.returncode != 0
    assert "security.W004" in result.stdout + result.stderr


def test_check_deploy_fails_when_the_https_redirect_is_switched_off(database_url: str) -> None:
    """The redirect is switchable (a plain-HTTP test install), and the check then reports it."""
    result = _run(CHECK_DEPLOY, production_env(database_url, DJANGO_SECURE_SSL_REDIRECT="0"))
    assert result.returncode != 0
    assert "security.W008" in result.stdout + result.stderr


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


def _settings(env: dict[str, str]) -> dict[str, object]:
    result = _run(["-c", _PRINT_SETTINGS], env)
    assert result.returncode == 0, result.stderr
    values: dict[str, object] = json.loads(result.stdout.strip().splitlines()[-1])
    return values


def test_production_settings_lock_the_cookies_down(database_url: str) -> None:
    values = _settings(production_env(database_url))
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


def test_https_redirect_and_hsts_are_switched_off_separately(database_url: str) -> None:
    no_redirect = _settings(production_env(database_url, DJANGO_SECURE_SSL_REDIRECT="0"))
    assert no_redirect["SECURE_SSL_REDIRECT"] is False
    assert no_redirect["SECURE_HSTS_SECONDS"] == 31536000
    no_hsts = _settings(production_env(database_url, DJANGO_HSTS_SECONDS="0"))
    assert no_hsts["SECURE_HSTS_SECONDS"] == 0
    assert no_hsts["SECURE_SSL_REDIRECT"] is True
