"""Every model has an admin; results and runs are read-only there."""

from __future__ import annotations

import pytest
from django.apps import apps
from django.contrib import admin
from django.test import Client

from testing.models import ComputationRun, StageResult


def test_every_model_of_the_testing_app_is_registered() -> None:
    """Except shear readings: they are stored as packed column blocks, which the admin cannot show
    as readings (and a stage can hold a million); they are read on the stage pages, through the
    API and the exports, and change only through the services that keep their audit trail."""
    missing = [
        m.__name__
        for m in apps.get_app_config("testing").get_models()
        if m not in admin.site._registry and not m.__name__.startswith("Historical")
    ]
    assert missing == ["ShearReadingBlock"]


@pytest.mark.django_db
def test_admin_changelists_open_and_results_are_read_only(admin_client: Client) -> None:
    for model in apps.get_app_config("testing").get_models():
        if model not in admin.site._registry:
            continue
        url = f"/admin/testing/{model._meta.model_name}/"
        assert admin_client.get(url).status_code == 200, url
    for model in (ComputationRun, StageResult):
        model_admin = admin.site._registry[model]
        assert not model_admin.has_add_permission(None)  # type: ignore[arg-type]
        assert not model_admin.has_change_permission(None)  # type: ignore[arg-type]
        assert not model_admin.has_delete_permission(None)  # type: ignore[arg-type]
