"""The portal tests reuse the report fixtures: a computed three-stage set of client A, a draft
report of it and the same report issued (signed PDF rendered in-process)."""

from __future__ import annotations

from tests.reports.conftest import (
    _media_root_and_eager_tasks,
    computed_set,
    draft,
    issued,
)

__all__ = ["_media_root_and_eager_tasks", "computed_set", "draft", "issued"]
