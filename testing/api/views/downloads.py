"""Download actions shared by the project and test-set viewsets: the AGS4 file and the results
tables. Lab staff only: a client's engineer downloads the signed report, whose values are frozen
at issue, while these files carry the newest computed results."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from django.http import HttpResponse
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, extend_schema
from rest_framework import exceptions

from testing.exporters.ags_dictionary import AGS_VERSIONS
from testing.exporters.downloads import TABLE_FORMATS, Download, DownloadRefused

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"

ags_schema = extend_schema(
    summary="The project's AGS4 file (lab staff)",
    parameters=[
        OpenApiParameter("version", str, enum=list(AGS_VERSIONS), default=AGS_VERSIONS[0]),
    ],
    responses={(200, "text/plain"): OpenApiTypes.BINARY},
)
results_schema = extend_schema(
    summary="Results tables as CSV (stage results) or XLSX (stage results and envelopes; lab staff)",
    parameters=[OpenApiParameter("file", str, enum=list(TABLE_FORMATS), default="csv")],
    responses={(200, "text/csv"): OpenApiTypes.BINARY, (200, XLSX): OpenApiTypes.BINARY},
)


def respond(parameter: str, make: Callable[[], Download]) -> HttpResponse:
    """The download, or a 400 naming the query parameter that asked for something not offered."""
    try:
        return make().response()
    except DownloadRefused as exc:
        raise exceptions.ValidationError({parameter: [str(exc)]}) from exc


def query(request: Any, name: str, default: str) -> str:
    return str(request.query_params.get(name) or default)
