"""Serializer fields that keep writes inside what the caller may touch."""

from __future__ import annotations

from collections.abc import Callable
from datetime import date, datetime
from typing import Any

from django.db.models import Model, Q, QuerySet
from rest_framework import serializers

from testing import access
from testing.access import AnyUser

MAX_ID = 2**63 - 1
EARLIEST_YEAR = 1900
LATEST_YEAR = 2199


class ScopedRelatedField(serializers.PrimaryKeyRelatedField):
    """A related record by id, chosen only among those the caller may see *and* change.

    Clients change nothing, so for them no id is valid. For lab staff the choice is limited by
    ``scope(user)`` (an ``access.*_filter``). A missing id and an id the caller may not use give the
    same message.
    """

    def __init__(self, *, model: type[Model], scope: Callable[[AnyUser], Q], **kwargs: Any):
        self.model = model
        self.scope = scope
        kwargs.setdefault("queryset", model._default_manager.none())
        super().__init__(**kwargs)

    def get_queryset(self) -> QuerySet[Any]:
        request = self.context.get("request")
        user = getattr(request, "user", None)
        if user is None or not access.is_lab_staff(user):
            return self.model._default_manager.none()
        return self.model._default_manager.filter(self.scope(user))

    def to_internal_value(self, data: Any) -> Any:
        # Out-of-range ids would reach the database driver and fail there; refuse them here.
        if isinstance(data, bool):
            self.fail("incorrect_type", data_type=type(data).__name__)
        if isinstance(data, int | str):
            try:
                number = int(data)
            except ValueError:
                self.fail("incorrect_type", data_type=type(data).__name__)
            if not 1 <= number <= MAX_ID:
                self.fail("does_not_exist", pk_value=data)
        return super().to_internal_value(data)


def lab_wide(user: AnyUser) -> Q:
    """The scope of the lab's own records (equipment, saved import layouts): any lab staff member
    may refer to any of them; ``ScopedRelatedField`` already refuses every id to clients."""
    return Q()


def _check_year(value: date) -> None:
    if not EARLIEST_YEAR <= value.year <= LATEST_YEAR:
        raise serializers.ValidationError(f"Give a date between {EARLIEST_YEAR} and {LATEST_YEAR}.")


class LabDateField(serializers.DateField):
    """A calendar date in a plausible range (so date arithmetic in services cannot overflow)."""

    def to_internal_value(self, value: Any) -> date:
        result = super().to_internal_value(value)
        _check_year(result)
        return result


class LabDateTimeField(serializers.DateTimeField):
    def to_internal_value(self, value: Any) -> datetime:
        result = super().to_internal_value(value)
        _check_year(result)
        return result
