"""The equipment register and report creation over the API: who may read and add, and that writes
go through the services (audited, checked) rather than around them."""

from __future__ import annotations

import pytest
from django.urls import reverse

from reports.models import Report, RevisionState
from testing.models import CalibrationRecord
from tests.api.conftest import World, token_client
from tests.api.routes import MISSING_ID

CERTIFICATE = {
    "certificate_number": "CAL-2026-044",
    "issuing_lab": "Calibration lab",
    "calibrated_on": "2026-03-02",
    "due_on": "2027-03-02",
    "model": "linear",
    "coefficients": [2.5],
    "zero_reading": 0.0,
    "range_min": 0.0,
    "range_max": 2000.0,
}


@pytest.mark.django_db
def test_the_lab_manager_adds_a_calibration_through_the_service(plain_world: World) -> None:
    device = plain_world.a.force_device
    manager = token_client(plain_world.cast.manager)
    response = manager.post(
        reverse("api:calibration-list"), {**CERTIFICATE, "device": device.pk}, format="json"
    )
    assert response.status_code == 201, response.content
    record = CalibrationRecord.objects.get(pk=response.json()["id"])
    assert record.created_by == plain_world.cast.manager
    assert record.history.count() == 1  # the register is audited (one history row per save)
    # Linear model F = K·(R − R0) with K = 2.5 N/div: 400 div → 1000 N (the certificate's formula).
    assert record.as_analysis().force_n([400.0])[0] == pytest.approx(1000.0)
    listed = manager.get(reverse("api:calibration-list"), {"device": device.pk}).json()
    assert record.pk in [row["id"] for row in listed["results"]]


@pytest.mark.django_db
def test_apparatus_tolerances_go_in_and_out_and_a_negative_one_is_refused(
    plain_world: World,
) -> None:
    manager = token_client(plain_world.cast.manager)
    url = reverse("api:apparatus-list")
    machine = {
        "reference": "SB-11", "box_shape": "square", "box_length_mm": 60.0, "box_width_mm": 60.0,
        "lever_ratio": 10.0, "hanger_mass_kg": 1.0, "mass_tolerance_pct": 0.1,
        "lever_ratio_tolerance": 0.02, "box_dimension_tolerance_mm": 0.05,
    }  # fmt: skip
    response = manager.post(url, machine, format="json")
    assert response.status_code == 201, response.content
    stored = manager.get(f"{url}{response.json()['id']}/").json()
    assert {k: stored[k] for k in machine} == machine
    negative = {**machine, "reference": "SB-12", "lever_ratio_tolerance": -0.02}
    response = manager.post(url, negative, format="json")
    assert response.status_code == 400, response.content
    assert "lever_ratio_tolerance" in response.content.decode()
    blank = {**machine, "reference": "SB-13", "mass_tolerance_pct": None}
    assert manager.post(url, blank, format="json").status_code == 201


@pytest.mark.django_db
def test_unusable_certificates_are_refused_with_the_service_message(plain_world: World) -> None:
    device = plain_world.a.force_device
    manager = token_client(plain_world.cast.manager)
    url = reverse("api:calibration-list")
    before = CalibrationRecord.objects.count()
    # A polynomial needs at least a0 and a1.
    one_term = {**CERTIFICATE, "device": device.pk, "model": "polynomial", "coefficients": [1.0]}
    response = manager.post(url, one_term, format="json")
    assert response.status_code == 400, response.content
    assert response.json()["detail"].startswith("Calibration CAL-2026-044")
    backwards = {**CERTIFICATE, "device": device.pk, "due_on": "2025-01-01"}
    assert manager.post(url, backwards, format="json").status_code == 400
    assert CalibrationRecord.objects.count() == before


@pytest.mark.django_db
def test_technicians_read_the_register_but_only_the_manager_adds(plain_world: World) -> None:
    technician = token_client(plain_world.cast.technician)
    apparatus = plain_world.a.apparatus
    detail = technician.get(reverse("api:apparatus-detail", kwargs={"pk": apparatus.pk}))
    assert detail.status_code == 200
    assert detail.json()["box_length_mm"] == apparatus.box_length_mm
    refused = technician.post(
        reverse("api:apparatus-list"),
        {"reference": "SB-9", "box_length_mm": 60.0, "box_width_mm": 60.0},
        format="json",
    )
    assert refused.status_code == 403
    assert "lab manager" in refused.json()["detail"]


@pytest.mark.django_db
def test_clients_see_nothing_of_the_register(plain_world: World) -> None:
    client_b = token_client(plain_world.cast.client_b)
    for route, target in (
        ("api:apparatus-detail", plain_world.a.apparatus),
        ("api:force-device-detail", plain_world.a.force_device),
        ("api:calibration-detail", plain_world.a.calibration),
        ("api:gauge-detail", plain_world.a.gauge),
    ):
        seen = client_b.get(reverse(route, kwargs={"pk": target.pk}))
        missing = client_b.get(reverse(route, kwargs={"pk": MISSING_ID}))
        assert seen.status_code == missing.status_code == 403, route
        assert seen.content == missing.content, route
    for route in ("api:apparatus-list", "api:calibration-list"):
        assert client_b.get(reverse(route)).status_code == 403


@pytest.mark.django_db
def test_a_technician_creates_a_draft_report_for_test_sets_of_a_project(
    plain_world: World,
) -> None:
    a = plain_world.a
    technician = token_client(plain_world.cast.technician)
    response = technician.post(
        reverse("api:report-list"),
        {"project": a.project.pk, "tests": [a.test.pk], "title": "Shear box results"},
        format="json",
    )
    assert response.status_code == 201, response.content
    body = response.json()
    report = Report.objects.get(pk=body["id"])
    assert report.project == a.project and list(report.tests.all()) == [a.test]
    [revision] = body["revisions"]
    assert revision["number"] == 1 and revision["state"] == RevisionState.DRAFT
    assert report.revisions.get().prepared_by == plain_world.cast.technician
    # The draft is then a revision like any other (the sign-off actions take it from here).
    seen = technician.get(reverse("api:report-revision-detail", kwargs={"pk": revision["id"]}))
    assert seen.json()["title"] == "Shear box results"


@pytest.mark.django_db
def test_reports_mixing_projects_or_by_a_checker_are_refused(plain_world: World) -> None:
    a, b = plain_world.a, plain_world.b
    url = reverse("api:report-list")
    technician = token_client(plain_world.cast.technician)
    mixed = technician.post(
        url, {"project": a.project.pk, "tests": [a.test.pk, b.test.pk]}, format="json"
    )
    assert mixed.status_code == 400
    assert "project" in mixed.json()["detail"]
    checker = token_client(plain_world.cast.checker)
    refused = checker.post(url, {"project": a.project.pk, "tests": [a.test.pk]}, format="json")
    assert refused.status_code == 403
    client_a = token_client(plain_world.cast.client_a)
    assert client_a.post(url, {"project": a.project.pk, "tests": [a.test.pk]}).status_code == 403
    assert client_a.get(url).status_code == 403
    assert not Report.objects.exists()
