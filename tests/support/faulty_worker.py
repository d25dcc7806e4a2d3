"""A Celery app for fault tests: the project's app, with one deliberate crash.

``celery -A tests.support.faulty_worker worker`` behaves exactly like ``-A labsite`` except that
reducing a stage whose notes contain ``CRASH-WORKER`` kills the worker process outright, as a
segmentation fault or an out-of-memory kill would. Production code has no such hook.
"""

from __future__ import annotations

import os
from typing import Any

from celery.signals import worker_init

from labsite.celery import app


@worker_init.connect
def _install_crash(**kwargs: Any) -> None:
    import django

    django.setup()
    from testing.services import direct_shear

    real_compute = direct_shear.stage_reduction_compute

    def crashing_compute(stage: Any, *args: Any, **kw: Any) -> Any:
        if "CRASH-WORKER" in (stage.notes or ""):
            os._exit(137)
        return real_compute(stage, *args, **kw)

    direct_shear.stage_reduction_compute = crashing_compute  # type: ignore[assignment]


__all__ = ["app"]
