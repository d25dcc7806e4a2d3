"""Bases for input and output serializers."""

from __future__ import annotations

from typing import Any

from django.db import models
from rest_framework import serializers

from testing.api.fields import LabDateField, LabDateTimeField


class InputSerializer(serializers.ModelSerializer):
    """Validates a create request; the view hands ``validated_data`` to a service, never saves."""

    serializer_field_mapping = {
        **serializers.ModelSerializer.serializer_field_mapping,
        models.DateField: LabDateField,
        models.DateTimeField: LabDateTimeField,
    }

    def create(self, validated_data: Any) -> Any:
        raise NotImplementedError("Input serializers do not save; the view calls a service.")

    def update(self, instance: Any, validated_data: Any) -> Any:
        raise NotImplementedError("Input serializers do not save; the view calls a service.")


class OutputSerializer(serializers.ModelSerializer):
    """Renders a record; every field is read-only."""

    def get_extra_kwargs(self) -> dict[str, Any]:
        extra = super().get_extra_kwargs()
        for name in self.Meta.fields:
            extra.setdefault(name, {})["read_only"] = True
        return extra
