"""The reports API: reports and revisions, PDF download, and sign-off actions (password re-entry).

``register(router)`` is called by ``labsite/api_urls.py``.
"""

from __future__ import annotations

from rest_framework.routers import BaseRouter

from reports.api.views import ReportRevisionViewSet, ReportViewSet


def register(router: BaseRouter) -> None:
    router.register("reports", ReportViewSet, basename="report")
    router.register("report-revisions", ReportRevisionViewSet, basename="report-revision")
