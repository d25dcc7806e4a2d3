"""Dependency rules that keep the pure core pure and the apps layered."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
FRAMEWORKS = ("django", "rest_framework", "celery", "weasyprint", "pyhanko", "redis", "psycopg")


def test_analysis_core_loads_no_framework_in_a_fresh_interpreter() -> None:
    code = (
        "import sys, testing.analysis as a; "
        f"bad = sorted(m for m in sys.modules if m.split('.')[0] in {FRAMEWORKS!r}); "
        "print(','.join(bad)); print(a.ANALYSIS_VERSION)"
    )
    result = subprocess.run(
        [sys.executable, "-c", code],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert result.returncode == 0, result.stderr
    loaded, version = result.stdout.splitlines()
    assert loaded == ""
    assert version.strip()


def _imported_roots(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    roots: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            roots.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            roots.add(node.module.split(".")[0])
    return roots


def test_testing_app_never_imports_reports() -> None:
    offenders = [
        str(p.relative_to(ROOT))
        for p in (ROOT / "testing").rglob("*.py")
        if "reports" in _imported_roots(p)
    ]
    assert offenders == []


def test_testing_package_init_stays_empty() -> None:
    # Importing testing.analysis runs testing/__init__.py first; anything there could pull in Django.
    assert (ROOT / "testing" / "__init__.py").read_text(encoding="utf-8").strip() == ""
