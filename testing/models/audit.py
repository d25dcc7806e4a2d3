"""Who changed which lab record, when, from what, to what, and why.

Two kinds of trail:

- **Field history** (django-simple-history): every save of an audited record (organisation,
  project, borehole, sample, specimen, test set, stage, stage exclusion, equipment and
  calibrations) adds one historical row holding the whole record as it became, the acting user,
  the UTC time, the kind of change (+ created, ~ changed, - deleted) and the reason. The value
  before a change is the previous historical row. Historical rows are append-only.
- **Readings changes** (:class:`ReadingsChange`): readings are written in bulk (hundreds of
  thousands of rows), so instead of a history row per reading there is one append-only row per
  bulk write: the stage, the row counts before and after, and a sha256 of the readings before and
  after (see :func:`testing.services.readings_audit.readings_state` for how it is computed).

Services say who acts and why with :func:`acting`; the admin sets the signed-in user itself, and
the request middleware supplies the user for anything else done within a request.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from django.conf import settings
from django.db import models
from django.db.models import Q
from django.utils import timezone
from simple_history.models import HistoricalRecords

if TYPE_CHECKING:
    from django.contrib.auth.models import User


@dataclass(frozen=True)
class Acting:
    user: User | None
    reason: str


_acting: ContextVar[Acting | None] = ContextVar("tauline_acting", default=None)


@contextmanager
def acting(user: User | None, reason: str = "") -> Iterator[Acting]:
    """Within the block, history rows name ``user`` as the actor and carry ``reason``.

    A nested block for the same user without a reason keeps the outer block's reason.
    """
    outer = _acting.get()
    reason = reason.strip()
    if not reason and outer is not None and outer.user == user:
        reason = outer.reason
    current = Acting(user=user, reason=reason)
    token = _acting.set(current)
    try:
        yield current
    finally:
        _acting.reset(token)


def current_acting() -> Acting | None:
    return _acting.get()


class AppendOnlyHistory(models.Model):
    """Base of every historical model here: rows are added, never changed or deleted."""

    class Meta:
        abstract = True

    def save(self, *args: Any, **kwargs: Any) -> None:
        if self.pk is not None:
            raise ValueError("History rows are append-only and cannot be changed.")
        super().save(*args, **kwargs)

    def delete(self, *args: Any, **kwargs: Any) -> tuple[int, dict[str, int]]:
        raise ValueError("History rows are append-only and cannot be deleted.")


class AuditedHistory(HistoricalRecords):
    """Field history whose actor and reason come from :func:`acting` when a service sets them.

    Order for the actor: the instance's ``_history_user`` (set by the admin), then the service's
    :func:`acting` block, then the signed-in user of the current request. The reason: the
    instance's ``_change_reason``, then the :func:`acting` block's reason.
    """

    def __init__(self, **kwargs: Any) -> None:
        kwargs.setdefault("bases", (AppendOnlyHistory,))
        super().__init__(**kwargs)

    def get_history_user(self, instance: models.Model) -> Any:
        if hasattr(instance, "_history_user"):
            return instance._history_user
        current = _acting.get()
        if current is not None and current.user is not None:
            return current.user
        return super().get_history_user(instance)

    def get_change_reason_for_object(
        self, instance: models.Model, history_type: str, using: str | None
    ) -> str | None:
        reason = super().get_change_reason_for_object(instance, history_type, using)
        if reason:
            return str(reason)
        current = _acting.get()
        return current.reason if current is not None and current.reason else None


class ReadingsSource(models.TextChoices):
    STORED = "stored", "Stored by a service (API or demo)"
    IMPORTED = "imported", "Imported from a logger file"
    ENTERED = "entered", "Entered by hand on the grid"


class ReadingsChange(models.Model):
    """One bulk change of a stage's readings. Append-only: never edited, never deleted."""

    stage = models.ForeignKey(
        "testing.ShearStage", on_delete=models.PROTECT, related_name="readings_changes"
    )
    at = models.DateTimeField(default=timezone.now, db_index=True, help_text="When (UTC).")
    by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, related_name="+"
    )
    source = models.CharField(max_length=10, choices=ReadingsSource.choices)
    # The import's id is kept even if the import record is ever removed.
    reading_import = models.ForeignKey(
        "testing.ReadingImport",
        on_delete=models.DO_NOTHING,
        db_constraint=False,
        null=True,
        blank=True,
        related_name="+",
    )
    consolidation_rows_before = models.PositiveIntegerField()
    shear_rows_before = models.PositiveIntegerField()
    consolidation_rows_after = models.PositiveIntegerField()
    shear_rows_after = models.PositiveIntegerField()
    sha256_before = models.CharField(max_length=64, help_text="Digest of the readings before.")
    sha256_after = models.CharField(max_length=64, help_text="Digest of the readings after.")
    reason = models.TextField(blank=True)

    class Meta:
        ordering = ["stage", "at", "id"]
        constraints = [
            models.CheckConstraint(
                name="readings_change_digests_complete",
                condition=~Q(sha256_before="") & ~Q(sha256_after=""),
            ),
        ]

    def __str__(self) -> str:
        return (
            f"{self.stage}: readings {self.consolidation_rows_before}+{self.shear_rows_before} → "
            f"{self.consolidation_rows_after}+{self.shear_rows_after} rows "
            f"({self.get_source_display().lower()})"
        )

    def save(self, *args: Any, **kwargs: Any) -> None:
        if self.pk is not None:
            raise ValueError("Readings changes are append-only and cannot be changed.")
        super().save(*args, **kwargs)

    def delete(self, *args: Any, **kwargs: Any) -> tuple[int, dict[str, int]]:
        raise ValueError("Readings changes are append-only and cannot be deleted.")
