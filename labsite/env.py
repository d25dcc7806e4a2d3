"""Typed readers for environment settings.

Each reader stops start-up with a message naming the variable when its value is malformed,
so a mistyped deployment never runs with a silently different configuration.
"""

from __future__ import annotations

import os
from pathlib import Path

from django.core.exceptions import ImproperlyConfigured

_TRUE = {"1", "true", "yes", "on"}
_FALSE = {"0", "false", "no", "off", ""}


def env_str(name: str, default: str = "") -> str:
    """The variable's value, or ``default``; ``NAME_FILE`` (a path) is read first when set."""
    file_path = os.environ.get(f"{name}_FILE")
    if file_path:
        try:
            return Path(file_path).read_text(encoding="utf-8").strip()
        except OSError as exc:
            raise ImproperlyConfigured(f"{name}_FILE={file_path!r} cannot be read: {exc}") from exc
    return os.environ.get(name, default)


def env_bool(name: str, default: bool) -> bool:
    raw = os.environ.get(name)
    if raw is None:
        return default
    value = raw.strip().lower()
    if value in _TRUE:
        return True
    if value in _FALSE:
        return False
    raise ImproperlyConfigured(f"{name}={raw!r} is not a yes/no value; use 1 or 0.")


def env_int(name: str, default: int, *, minimum: int | None = None) -> int:
    raw = os.environ.get(name)
    if raw is None or raw.strip() == "":
        return default
    try:
        value = int(raw)
    except ValueError as exc:
        raise ImproperlyConfigured(f"{name}={raw!r} is not a whole number.") from exc
    if minimum is not None and value < minimum:
        raise ImproperlyConfigured(f"{name}={value} is below the minimum {minimum}.")
    return value


def env_list(name: str, default: list[str]) -> list[str]:
    raw = os.environ.get(name)
    if raw is None:
        return default
    return [item.strip() for item in raw.split(",") if item.strip()]
