"""One error body for every API failure: ``{"detail": "...", "errors": {field: [messages]}}``.

``errors`` is empty unless the request had field-level problems; nested fields are joined with dots
(``points.2.normal_stress_kpa``). A service's refusal (``ServiceError``) is a 400 whose detail is the
service's message as written for the user; ``NotAllowed`` (the role may not do this) is a 403.
Readings refused row by row add ``rows``: every bad row with its row number, column, value and
reason (see ``RowsRejected``).
A record that does not exist and one the caller may not see give the same 404 body.
"""

from __future__ import annotations

from typing import Any

from django.core.exceptions import PermissionDenied as DjangoPermissionDenied
from django.core.exceptions import ValidationError as DjangoValidationError
from django.db import IntegrityError
from django.http import Http404
from rest_framework import exceptions, status
from rest_framework.response import Response
from rest_framework.serializers import as_serializer_error
from rest_framework.settings import api_settings
from rest_framework.views import exception_handler

from testing.services.errors import NotAllowed, ServiceError
from testing.services.imports import ReadingsRejected

NOT_FOUND = "Not found."


class ServiceRefused(exceptions.APIException):
    status_code = status.HTTP_400_BAD_REQUEST
    default_detail = "The request cannot be carried out."
    default_code = "refused"


class RowsRejected(exceptions.APIException):
    """Readings refused with every bad row: the error body gains ``rows`` (row, column, value,
    reason) and ``errors`` names each as ``rows.<row>.<column>``. Nothing was saved."""

    status_code = status.HTTP_400_BAD_REQUEST
    default_detail = "Some rows are not valid; nothing was saved."
    default_code = "invalid_rows"

    def __init__(self, detail: str, rows: list[dict[str, Any]]) -> None:
        super().__init__(detail)
        self.rows = rows

    def field_errors(self) -> dict[str, list[str]]:
        out: dict[str, list[str]] = {}
        for row in self.rows:
            value = f" (value {row['value']!r})" if row.get("value") else ""
            key = f"rows.{row['row']}.{row['column']}"
            out.setdefault(key, []).append(f"{row['reason']}{value}")
        return out


class Unavailable(exceptions.APIException):
    status_code = status.HTTP_503_SERVICE_UNAVAILABLE
    default_detail = "The database failed part-way; nothing was saved. Send the request again."
    default_code = "unavailable"


class Conflict(exceptions.APIException):
    status_code = status.HTTP_409_CONFLICT
    default_detail = "The change conflicts with a record saved meanwhile; reload and try again."
    default_code = "conflict"


def _flatten(data: Any, prefix: str = "") -> dict[str, list[str]]:
    """Field errors as ``{"a.b": ["message", ...]}``, whatever the nesting of serializers."""
    out: dict[str, list[str]] = {}
    if isinstance(data, dict):
        for key, value in data.items():
            out.update(_flatten(value, f"{prefix}.{key}" if prefix else str(key)))
    elif isinstance(data, list) and data and all(isinstance(v, str) for v in data):
        out[prefix or api_settings.NON_FIELD_ERRORS_KEY] = [str(v) for v in data]
    elif isinstance(data, list):
        for index, value in enumerate(data):
            if value:
                out.update(_flatten(value, f"{prefix}.{index}" if prefix else str(index)))
    elif data:
        out[prefix or api_settings.NON_FIELD_ERRORS_KEY] = [str(data)]
    return out


def _translate(exc: Exception) -> Exception:
    if isinstance(exc, ReadingsRejected):
        return RowsRejected(str(exc), [e.as_dict() for e in exc.errors])
    if isinstance(exc, NotAllowed):
        return exceptions.PermissionDenied(str(exc))
    if isinstance(exc, ServiceError):
        return ServiceRefused(str(exc))
    if isinstance(exc, DjangoValidationError):
        return exceptions.ValidationError(as_serializer_error(exc))
    if isinstance(exc, Http404 | exceptions.NotFound):
        # Never say which kind of record was asked for, or why it was not found.
        return exceptions.NotFound(NOT_FOUND)
    if isinstance(exc, DjangoPermissionDenied):
        return exceptions.PermissionDenied()
    if isinstance(exc, IntegrityError):
        return Conflict()
    return exc


def api_exception_handler(exc: Exception, context: dict[str, Any]) -> Response | None:
    exc = _translate(exc)
    response = exception_handler(exc, context)
    if response is None:
        return None  # a programming error: Django's 500 handling and logging take over
    if isinstance(exc, exceptions.ValidationError):
        errors = _flatten(response.data)
        messages = [m for field_messages in errors.values() for m in field_messages]
        if list(errors) == [api_settings.NON_FIELD_ERRORS_KEY] and len(messages) == 1:
            detail = messages[0]
        else:
            detail = "Some fields are not valid; see errors."
        response.data = {"detail": detail, "errors": errors}
    elif isinstance(exc, RowsRejected):
        response.data = {"detail": str(exc.detail), "errors": exc.field_errors(), "rows": exc.rows}
    else:
        data = response.data
        detail = data.get("detail", "") if isinstance(data, dict) else str(data)
        response.data = {"detail": str(detail), "errors": {}}
    return response
