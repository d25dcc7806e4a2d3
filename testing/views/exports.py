"""Downloads from the staff pages: a project's AGS4 file and the results tables (CSV or XLSX) of a
project or a test set."""

from __future__ import annotations

from collections.abc import Callable

from django.http import Http404, HttpRequest, HttpResponse, HttpResponseBadRequest
from django.views.decorators.http import require_GET

from testing import access
from testing.exporters.downloads import (
    Download,
    DownloadRefused,
    project_ags_download,
    project_results_download,
    set_results_download,
)
from testing.views.common import staff_page, staff_user


def _table(make: Callable[[], Download]) -> HttpResponse:
    try:
        return make().response()
    except DownloadRefused as exc:  # results.<anything but csv or xlsx> is not a page
        raise Http404(str(exc)) from exc


@staff_page
@require_GET
def project_ags(request: HttpRequest, project_id: int) -> HttpResponse:
    project = access.project_get_for_user(user=request.user, project_id=project_id)
    version = request.GET.get("version", "4.1.1")
    try:
        download = project_ags_download(user=staff_user(request), project=project, version=version)
    except DownloadRefused as exc:
        return HttpResponseBadRequest(str(exc), content_type="text/plain; charset=utf-8")
    return download.response()


@staff_page
@require_GET
def project_results(request: HttpRequest, project_id: int, file_format: str) -> HttpResponse:
    project = access.project_get_for_user(user=request.user, project_id=project_id)
    user = staff_user(request)
    return _table(
        lambda: project_results_download(user=user, project=project, file_format=file_format)
    )


@staff_page
@require_GET
def test_results(request: HttpRequest, test_id: int, file_format: str) -> HttpResponse:
    test = access.test_get_for_user(user=request.user, test_id=test_id)
    user = staff_user(request)
    return _table(lambda: set_results_download(user=user, test=test, file_format=file_format))
