"""Tauline site configuration. Importing the Celery app here registers it for ``@shared_task``."""

from labsite.celery import app as celery_app

__all__ = ["celery_app"]
