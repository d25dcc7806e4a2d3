"""docker-compose.yml is valid for Debian's docker-compose 1.29 and has the scale-out shape.

No container engine runs here: ``docker-compose config`` validates and resolves the file
offline, which is enough to catch schema mistakes, bad interpolation and missing services.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest

ROOT = Path(__file__).resolve().parents[2]
COMPOSE_FILE = ROOT / "docker-compose.yml"
INSTALL_HINT = "apt-get install -y --no-install-recommends docker-compose"


def _docker_compose() -> str:
    exe = shutil.which("docker-compose")
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail(f"docker-compose is not installed; CI must install it ({INSTALL_HINT})")
        pytest.skip(f"docker-compose is not installed: {INSTALL_HINT}")
    return exe


def _run(*args: str, secret: str | None = "test-only-secret") -> subprocess.CompletedProcess[str]:
    env = {k: v for k, v in os.environ.items() if k != "DJANGO_SECRET_KEY"}
    if secret is not None:
        env["DJANGO_SECRET_KEY"] = secret
    return subprocess.run(
        [_docker_compose(), "-f", str(COMPOSE_FILE), *args],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )


def _yaml_interpreter(exe: str) -> str:
    """The Python that runs docker-compose: it has PyYAML, which docker-compose itself needs.

    The project's virtualenv need not carry PyYAML just for this test.
    """
    try:
        import yaml  # noqa: F401
    except ImportError:
        pass
    else:
        return sys.executable
    first_line = Path(exe).read_text(errors="replace").splitlines()[0]
    assert first_line.startswith("#!"), f"cannot tell which Python runs {exe}"
    return first_line[2:].strip().split()[0]


def _resolved_config() -> dict[str, Any]:
    result = _run("config")
    assert result.returncode == 0, result.stderr
    to_json = "import json, sys, yaml; json.dump(yaml.safe_load(sys.stdin), sys.stdout)"
    converted = subprocess.run(
        [_yaml_interpreter(_docker_compose()), "-c", to_json],
        input=result.stdout,
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert converted.returncode == 0, converted.stderr
    config: dict[str, Any] = json.loads(converted.stdout)
    return config


def test_compose_file_validates() -> None:
    result = _run("config", "-q")
    assert result.returncode == 0, result.stderr


def test_compose_refuses_to_start_without_a_secret_key() -> None:
    result = _run("config", "-q", secret=None)
    assert result.returncode != 0
    assert "DJANGO_SECRET_KEY" in result.stderr


def test_compose_has_no_top_level_name() -> None:
    # docker-compose 1.29 rejects it; keep the file loadable by the packaged tool.
    top_level = [
        line.split(":", 1)[0]
        for line in COMPOSE_FILE.read_text().splitlines()
        if line and not line.startswith((" ", "#", "\t"))
    ]
    assert "name" not in top_level


def test_compose_services_and_scalable_worker() -> None:
    result = _run("config", "--services")
    assert result.returncode == 0, result.stderr
    services = set(result.stdout.split())
    assert {"postgres", "redis", "web", "worker", "migrate"} <= services

    config = _resolved_config()["services"]
    worker = config["worker"]
    assert "container_name" not in worker, "a fixed container name breaks --scale worker=N"
    assert "ports" not in worker, "published ports break --scale worker=N"
    assert worker["command"][:3] == ["celery", "-A", "labsite"]
    assert "worker" in worker["command"]

    web = config["web"]
    assert web["command"][0] == "gunicorn"
    assert "labsite.wsgi:application" in web["command"]
    assert 8000 in _container_ports(web)

    for name in ("web", "worker", "migrate"):
        env = config[name]["environment"]
        assert env["DJANGO_DEBUG"] == "0"
        assert env["DJANGO_SECRET_KEY"] == "test-only-secret"
        assert env["DATABASE_URL"].startswith("postgres://")
        assert env["REDIS_URL"].startswith("redis://")
        assert env["MEDIA_ROOT"]
        assert config[name]["depends_on"]["postgres"]["condition"] == "service_healthy"

    # Web and worker share the uploaded and rendered files.
    web_media = {v.split(":")[0] if isinstance(v, str) else v["source"] for v in web["volumes"]}
    worker_media = {
        v.split(":")[0] if isinstance(v, str) else v["source"] for v in worker["volumes"]
    }
    assert "media" in web_media & worker_media

    assert "healthcheck" in config["postgres"]
    assert config["postgres"]["image"].startswith("postgres:15")
    assert config["redis"]["image"].startswith("redis:7")


def _container_ports(service: dict[str, Any]) -> set[int]:
    """Container-side ports, from either the long (dict) or the short ("8000:8000") syntax."""
    found: set[int] = set()
    for port in service.get("ports", []):
        if isinstance(port, dict):
            found.add(int(port["target"]))
        else:
            found.add(int(str(port).rsplit(":", 1)[-1].split("/")[0]))
    return found
