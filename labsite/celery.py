"""The Celery application. With ``REDIS_URL`` unset, tasks run eagerly in the web process."""

from __future__ import annotations

import os

from celery import Celery

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "labsite.settings")

app = Celery("tauline")
app.config_from_object("django.conf:settings", namespace="CELERY")
app.autodiscover_tasks()


@app.task(name="tauline.ping")
def ping() -> str:
    """Round trip check used by the health endpoint and the topology test."""
    return "pong"
