"""The core imports only the standard library, numpy and scipy."""

from __future__ import annotations

import subprocess
import sys


def test_core_loads_no_framework() -> None:
    code = (
        "import sys, testing.analysis; "
        "bad = [m for m in sys.modules if m.split('.')[0] in "
        "('django', 'rest_framework', 'celery', 'weasyprint', 'requests', 'pandas')]; "
        "print(','.join(bad))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_version_is_exported() -> None:
    from testing.analysis import ANALYSIS_VERSION

    major, minor, patch = ANALYSIS_VERSION.split(".")
    assert all(part.isdigit() for part in (major, minor, patch))
