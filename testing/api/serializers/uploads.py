"""Readings sent to a stage: a logger file (multipart) or rows (JSON), and what the API answers.

Both forms go through the importer's checks (``testing.services.imports``): every bad row is
listed and nothing is saved, or every row is saved in one transaction.
"""

from __future__ import annotations

from typing import Any

from drf_spectacular.utils import extend_schema_field
from rest_framework import serializers

from testing.api.fields import ScopedRelatedField, lab_wide
from testing.importers.layout import CANONICAL_LAYOUT
from testing.models import ImportLayout

MAX_ROWS = 200_000  # the JSON body is capped by DATA_UPLOAD_MAX_MEMORY_SIZE well before this

_CANONICAL = {q: c.column for q, c in CANONICAL_LAYOUT.columns.items()}
ROW_HELP = (
    "One reading, keyed by the layout's column names; by default the canonical CSV's: "
    f"{_CANONICAL['time']} [s from the start of the phase], {_CANONICAL['horizontal']} [mm], "
    f"{_CANONICAL['vertical']} [mm, upward (dilation) positive], {_CANONICAL['force']} [N], "
    f"optional {_CANONICAL['phase']} (consolidation or shear; default shear) and "
    f"{_CANONICAL['traverse']} (1, 2, …; default 1). Consolidation rows may leave horizontal "
    "and force out."
)


@extend_schema_field(
    {
        "type": "object",
        "description": ROW_HELP,
        "properties": {
            _CANONICAL["time"]: {"type": "number", "description": "Time [s]."},
            _CANONICAL["horizontal"]: {"type": "number", "description": "Horizontal [mm]."},
            _CANONICAL["vertical"]: {"type": "number", "description": "Vertical [mm], up +."},
            _CANONICAL["force"]: {"type": "number", "description": "Shear force [N]."},
            _CANONICAL["phase"]: {"type": "string", "enum": ["consolidation", "shear"]},
            _CANONICAL["traverse"]: {"type": "integer", "minimum": 1},
        },
        "additionalProperties": True,
    }
)
class ReadingRowField(serializers.JSONField):
    """Any JSON value: the service checks each row and reports a bad one with its number."""


class _UploadOptions(serializers.Serializer[Any]):
    layout = ScopedRelatedField(
        model=ImportLayout,
        scope=lab_wide,
        required=False,
        allow_null=True,
        help_text="A saved column layout's id; default: the canonical CSV layout.",
    )
    reason = serializers.CharField(
        max_length=200,
        required=False,
        allow_blank=True,
        help_text="Why the readings are sent (recorded in the readings audit).",
    )


class ReadingsFileIn(_UploadOptions):
    file = serializers.FileField(
        help_text="The logger file: CSV in the canonical layout (or the layout given), or XLSX."
    )


class ReadingsRowsIn(_UploadOptions):
    rows = serializers.ListField(
        child=ReadingRowField(),
        allow_empty=False,
        max_length=MAX_ROWS,
        help_text="The readings, in time order within each phase and traverse.",
    )


class ReadingsUploadOut(serializers.Serializer[Any]):
    state = serializers.CharField(
        help_text="succeeded: saved; duplicate: this file was already imported, nothing added."
    )
    reading_import = serializers.IntegerField(
        allow_null=True, help_text="The import record of a file upload; null for rows."
    )
    duplicate_of = serializers.IntegerField(allow_null=True)
    consolidation_rows = serializers.IntegerField(help_text="Consolidation readings saved.")
    shear_rows = serializers.IntegerField(help_text="Shear readings saved.")
    replaced_rows = serializers.IntegerField(help_text="Earlier readings of those phases replaced.")
    message = serializers.CharField(allow_blank=True)


BAD_ROW_SCHEMA = {
    "type": "object",
    "properties": {
        "row": {
            "type": "integer",
            "description": "File row counted from 1 with the header row; for JSON rows, the "
            "row's place in the list from 1.",
        },
        "column": {"type": "string"},
        "value": {"type": "string"},
        "reason": {"type": "string"},
    },
    "required": ["row", "column", "value", "reason"],
}
# The API's error body (testing.api.errors); a rejected upload adds ``rows``. A raw schema, as a
# serializer cannot declare a field named ``errors``.
READINGS_REJECTED_SCHEMA = {
    "type": "object",
    "properties": {
        "detail": {"type": "string"},
        "errors": {
            "type": "object",
            "additionalProperties": {"type": "array", "items": {"type": "string"}},
            "description": 'Field messages; each bad row as "rows.<row>.<column>".',
        },
        "rows": {
            "type": "array",
            "items": BAD_ROW_SCHEMA,
            "description": "Every bad row, when the readings were refused row by row.",
        },
    },
    "required": ["detail", "errors"],
}
