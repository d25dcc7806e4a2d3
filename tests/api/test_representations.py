"""The stage-result list's fast path renders exactly what the declared serializer fields render."""

from __future__ import annotations

import pytest
from rest_framework import serializers

from testing.api.serializers.results import ROW_COLUMNS, StageResultOut
from testing.models import StageResult
from tests.api.conftest import World


@pytest.mark.django_db
def test_row_instance_and_declared_field_paths_agree(plain_world: World) -> None:
    instance = StageResult.objects.select_related("stage__test", "stage__specimen").get(
        pk=plain_world.a.result.pk
    )
    row = StageResult.objects.filter(pk=instance.pk).values(*ROW_COLUMNS).get()
    serializer = StageResultOut()
    # DRF's own field-by-field rendering of the declared fields is the reference.
    reference = serializers.ModelSerializer.to_representation(serializer, instance)
    assert dict(serializer.to_representation(instance)) == dict(reference)
    assert dict(serializer.to_representation(row)) == dict(reference)
    assert reference["test"] == {
        "id": plain_world.a.test.pk,
        "reference": plain_world.a.test.reference,
    }
    assert reference["specimen"]["reference"] == plain_world.a.specimen.reference
