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


@pytest.mark.django_db
def test_test_set_recompute_answers_the_documented_object(plain_world: World) -> None:
    """The response has the shape the OpenAPI schema promises: {"runs": [one per stage]}."""
    from django.urls import reverse

    from testing.models import ComputationRun, RunKind
    from tests.api.conftest import token_client

    test = plain_world.a.test
    response = token_client(plain_world.cast.technician).post(
        reverse("api:test-set-recompute", args=[test.pk]), {"reason": "shape"}, format="json"
    )
    assert response.status_code == 202, response.content
    body = response.json()
    assert set(body) == {"runs"}
    stages = set(test.stages.values_list("pk", flat=True))
    assert {run["stage"] for run in body["runs"]} == stages
    assert all(run["kind"] == RunKind.STAGE_REDUCTION for run in body["runs"])
    assert ComputationRun.objects.filter(pk__in=[r["id"] for r in body["runs"]]).count() == len(
        stages
    )
