"""The Django admin does not go around the rules: report records and checked lab data are
read-only there, even for a superuser; changes go through the services (reason, audit, sign-off)."""

from __future__ import annotations

import re
from typing import Any

import pytest
from django.apps import apps
from django.contrib import admin
from django.test import Client

from reports.models import ReportRevision, RevisionState
from testing.models import (
    ConsolidationReading,
    ReadingsChange,
    ShearReadingBlock,
    ShearStage,
    Specimen,
    StageResult,
)
from testing.selectors_readings import shear_columns
from testing.services.stage_inputs import stage_inputs_load
from tests.conftest import PASSWORD, Cast

pytestmark = pytest.mark.django_db


def _change_url(obj: Any) -> str:
    return f"/admin/{obj._meta.app_label}/{obj._meta.model_name}/{obj.pk}/change/"


def test_every_reports_model_has_a_read_only_admin(admin_client: Client) -> None:
    models = list(apps.get_app_config("reports").get_models())
    assert [m.__name__ for m in models if m not in admin.site._registry] == []
    for model in models:
        model_admin = admin.site._registry[model]
        assert not model_admin.has_add_permission(None)  # type: ignore[arg-type]
        assert not model_admin.has_change_permission(None)  # type: ignore[arg-type]
        assert not model_admin.has_delete_permission(None)  # type: ignore[arg-type]
        url = f"/admin/reports/{model._meta.model_name}/"
        assert admin_client.get(url).status_code == 200, url


def test_admin_post_does_not_change_a_checked_stage_or_its_readings(
    admin_client: Client, cast: Cast, draft: ReportRevision
) -> None:
    """A superuser posts new values for a stage whose results are in a checked report: a stage's
    loading needs a reason once it has results (testing.services.edits), readings change only in
    bulk with a ReadingsChange row. The admin refuses (403) and nothing changes."""
    from reports import services

    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    draft.refresh_from_db()
    assert draft.state == RevisionState.CHECKED
    stage = ShearStage.objects.filter(test__in=draft.report.tests.all()).order_by("pk").first()
    assert stage is not None and StageResult.objects.filter(stage=stage).exists()
    digest_before = stage_inputs_load(stage).digest()
    log_before = ReadingsChange.objects.count()
    reading = shear_columns(stage.pk).row(10)
    # Shear readings have no admin pages at all (packed column blocks; a stage can hold a million).
    assert not admin.site.is_registered(ShearReadingBlock)
    consolidation = ConsolidationReading.objects.filter(stage=stage).order_by("pk").first()
    assert consolidation is not None

    posts = [
        (
            consolidation,
            {
                "stage": stage.pk,
                "elapsed_min": consolidation.elapsed_min,
                "settlement_mm": consolidation.settlement_mm + 0.5,
            },
        ),
        (
            stage,
            {
                "test": stage.test_id,
                "specimen": stage.specimen_id,
                "stage_number": stage.stage_number,
                "loading": stage.loading,
                "direct_mass_kg": stage.direct_mass_kg,
                "hanger_mass_kg": stage.hanger_mass_kg,
                "weights_mass_kg": (stage.weights_mass_kg or 0) + 10,
                "lever_ratio": stage.lever_ratio,
                "force_unit": stage.force_unit,
                "force_factor_n_per_unit": stage.force_factor_n_per_unit,
                "rate_mm_per_min": stage.rate_mm_per_min,
            },
        ),
        (
            stage.specimen,
            {
                "sample": stage.specimen.sample_id,
                "reference": stage.specimen.reference,
                "height_mm": stage.specimen.height_mm + 1,
            },
        ),
    ]
    for obj, data in posts:
        assert admin_client.post(_change_url(obj), data).status_code == 403, obj
        delete_url = _change_url(obj).replace("/change/", "/delete/")
        assert admin_client.post(delete_url, {"post": "yes"}).status_code == 403, obj
        # Viewing stays possible (a lab looks things up here).
        assert admin_client.get(_change_url(obj)).status_code == 200, obj

    stage.refresh_from_db()
    assert stage_inputs_load(stage).digest() == digest_before
    assert ReadingsChange.objects.count() == log_before
    after = shear_columns(stage.pk).row(10)
    assert (after.traverse, after.seq) == (reading.traverse, reading.seq)
    assert after.force_reading == reading.force_reading
    assert Specimen.objects.get(pk=stage.specimen_id).height_mm == stage.specimen.height_mm

    # The test set's page shows its stages, but not as a form that could change them.
    page = admin_client.get(_change_url(stage.test)).content.decode()
    assert "Shear stage" in page
    assert not re.search(r'name="[^"]*(weights_mass_kg|lever_ratio|rate_mm_per_min)"', page)
