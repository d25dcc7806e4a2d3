"""Invariants the database itself refuses to break, whatever code path writes the row."""

from __future__ import annotations

from datetime import date
from decimal import Decimal

import pytest
from django.db import IntegrityError, transaction

from testing.models import (
    Borehole,
    DirectShearTest,
    LabProfile,
    Project,
    Sample,
    SampleEvent,
    ShearStage,
    Specimen,
)
from tests.conftest import Cast, Records


def _specimen(sample: Sample, reference: str, **overrides: object) -> Specimen:
    fields: dict[str, object] = {
        "sample": sample,
        "reference": reference,
        "depth_top_m": Decimal("1.30"),
        "preparation": "undisturbed",
        "length_mm": 60.0,
        "width_mm": 60.0,
        "height_mm": 20.0,
        "initial_mass_g": 150.0,
    }
    fields.update(overrides)
    return Specimen.objects.create(**fields)


def _test(
    records: Records, cast: Cast, reference: str = "DS1", **overrides: object
) -> DirectShearTest:
    fields: dict[str, object] = {
        "project": records.project,
        "reference": reference,
        "method": "bs-1377-7",
        "method_edition": "1990",
        "box_length_mm": 60.0,
        "box_width_mm": 60.0,
        "requested_on": date(2026, 11, 2),
        "created_by": cast.technician,
    }
    fields.update(overrides)
    return DirectShearTest.objects.create(**fields)


def _assert_refused(create: object) -> None:
    with pytest.raises(IntegrityError), transaction.atomic():
        create()  # type: ignore[operator]


def test_project_reference_is_unique_across_the_lab(records_a: Records, cast: Cast) -> None:
    _assert_refused(
        lambda: Project.objects.create(
            organisation=cast.org_b, reference=records_a.project.reference, name="x"
        )
    )


def test_borehole_reference_unique_per_project_but_reusable_elsewhere(
    records_a: Records, records_b: Records
) -> None:
    _assert_refused(lambda: Borehole.objects.create(project=records_a.project, reference="BH01"))
    assert records_b.borehole.reference == records_a.borehole.reference  # same name, other project


def test_sample_depths_must_be_ordered_and_nonnegative(records_a: Records, cast: Cast) -> None:
    base = {
        "borehole": records_a.borehole,
        "sample_type": "B",
        "received_on": date(2026, 11, 1),
        "received_by": cast.technician,
    }
    _assert_refused(
        lambda: Sample.objects.create(
            reference="B2", depth_top_m=Decimal("3.0"), depth_base_m=Decimal("2.5"), **base
        )
    )
    _assert_refused(
        lambda: Sample.objects.create(
            reference="B3", depth_top_m=Decimal("-0.5"), depth_base_m=Decimal("0.5"), **base
        )
    )
    _assert_refused(
        lambda: Sample.objects.create(
            reference="U1", depth_top_m=Decimal("5.0"), depth_base_m=Decimal("5.5"), **base
        )
    )


def test_sample_due_date_cannot_precede_receipt(records_a: Records, cast: Cast) -> None:
    _assert_refused(
        lambda: Sample.objects.create(
            borehole=records_a.borehole,
            reference="D9",
            sample_type="D",
            depth_top_m=1,
            depth_base_m=1,
            received_on=date(2026, 11, 10),
            due_on=date(2026, 11, 1),
            received_by=cast.technician,
        )
    )


def test_specimen_dimensions_must_be_positive_and_match_shape(records_a: Records) -> None:
    _assert_refused(lambda: _specimen(records_a.sample, "S0", height_mm=0.0))
    _assert_refused(lambda: _specimen(records_a.sample, "S0", width_mm=-60.0))
    _assert_refused(
        lambda: _specimen(records_a.sample, "S0", shape="circular")
    )  # square sizes, no diameter
    _assert_refused(
        lambda: _specimen(records_a.sample, "S0", preparation="recompacted")
    )  # no target density
    _specimen(records_a.sample, "S1")
    _assert_refused(lambda: _specimen(records_a.sample, "S1"))  # duplicate reference in the sample


def test_stage_numbers_unique_per_test_and_lever_loading_complete(
    records_a: Records, cast: Cast
) -> None:
    test = _test(records_a, cast)
    lever = {
        "direct_mass_kg": 2.0,
        "hanger_mass_kg": 1.0,
        "weights_mass_kg": 5.0,
        "lever_ratio": 10.0,
    }
    ShearStage.objects.create(
        test=test, stage_number=1, specimen=_specimen(records_a.sample, "S1"), **lever
    )
    s2 = _specimen(records_a.sample, "S2")
    _assert_refused(
        lambda: ShearStage.objects.create(test=test, stage_number=1, specimen=s2, **lever)
    )
    _assert_refused(
        lambda: ShearStage.objects.create(
            test=test, stage_number=2, specimen=s2, **{**lever, "lever_ratio": 0}
        )
    )
    _assert_refused(
        lambda: ShearStage.objects.create(
            test=test, stage_number=2, specimen=s2, hanger_mass_kg=1.0
        )
    )
    _assert_refused(
        lambda: ShearStage.objects.create(test=test, stage_number=2, specimen=s2, loading="frame")
    )
    ShearStage.objects.create(
        test=test, stage_number=2, specimen=s2, loading="frame", applied_normal_stress_kpa=100.0
    )


def test_box_geometry_positive_and_consistent(records_a: Records, cast: Cast) -> None:
    _assert_refused(lambda: _test(records_a, cast, box_length_mm=0.0))
    _assert_refused(
        lambda: _test(records_a, cast, box_shape="circular")
    )  # width given for a circular box
    _assert_refused(lambda: _test(records_a, cast, box_width_mm=None))
    _test(
        records_a,
        cast,
        reference="DS2",
        box_shape="circular",
        box_length_mm=63.5,
        box_width_mm=None,
    )


def test_a_person_is_staff_or_client_never_both(cast: Cast) -> None:
    profile = LabProfile.objects.get(user=cast.client_a)
    profile.is_checker = True
    _assert_refused(lambda: profile.save())


def test_sample_event_must_move_and_is_append_only(records_a: Records, cast: Cast) -> None:
    _assert_refused(
        lambda: SampleEvent.objects.create(
            sample=records_a.sample,
            at=records_a.sample.status_changed_at,
            by=cast.technician,
            from_status="received",
            to_status="received",
        )
    )
    event = records_a.sample.events.get()
    event.note = "rewritten"
    with pytest.raises(ValueError, match="append-only"):
        event.save()
    with pytest.raises(ValueError, match="append-only"):
        event.delete()
