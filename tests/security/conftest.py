"""Fixtures for the security suite: an issued, signed report of client A (the report tests' own
builders, so the report is made through the real workflow) and its throw-away media folder."""

from __future__ import annotations

import tempfile
from collections.abc import Callable, Iterator
from typing import Any

import pytest
from django.core.cache import cache

from labsite.celery import app as celery_app
from reports import services
from reports.models import ReportRevision
from testing.models import DirectShearTest
from tests.conftest import PASSWORD, Cast, Records
from tests.reports.conftest import build_test_set, compute, issue


@pytest.fixture(autouse=True)
def _fresh_cache() -> Iterator[None]:
    """Throttle counters live in the cache; each test starts from none."""
    cache.clear()
    yield
    cache.clear()


@pytest.fixture
def media_root(settings: Any) -> Iterator[str]:
    """PDFs and the self-signed lab key in a throw-away folder; tasks run in-process."""
    eager = celery_app.conf.task_always_eager
    celery_app.conf.task_always_eager = True
    settings.CELERY_TASK_ALWAYS_EAGER = True
    with tempfile.TemporaryDirectory(prefix="tauline-sec-media-") as folder:
        settings.MEDIA_ROOT = folder
        settings.TAULINE_SIGNING_KEY_FILE = ""
        settings.TAULINE_SIGNING_CERT_FILE = ""
        yield folder
    celery_app.conf.task_always_eager = eager


def issued_revision_for(
    cast: Cast, records: Records, capture: Callable[..., Any]
) -> ReportRevision:
    """The records' three-stage set, computed, reported, checked, approved and issued (signed)."""
    test: DirectShearTest = build_test_set(
        user=cast.technician, project=records.project, sample=records.sample
    )
    compute(test, cast.technician, capture)
    draft = services.report_create(user=cast.technician, project=records.project, tests=[test])
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=draft, password=PASSWORD)
    revision = issue(draft, cast.approver, capture)
    assert revision.state == "issued" and revision.pdf_sha256
    return revision


@pytest.fixture
def issued_revision(
    media_root: str,
    cast: Cast,
    records_a: Records,
    django_capture_on_commit_callbacks: Callable[..., Any],
) -> ReportRevision:
    """Client A's report, issued through the real workflow."""
    return issued_revision_for(cast, records_a, django_capture_on_commit_callbacks)
