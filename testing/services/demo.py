"""The demonstration scenario: an invented client, site and project with samples in every state.

Everything here is invented for the demo — the organisations, the site, the boreholes and the
soils. Readings come from ``testing.demo.synthetic`` (physically sensible models with
gauge-resolution noise), so a new install has something realistic to look at.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime, timedelta
from decimal import Decimal
from typing import Any

from django.conf import settings
from django.contrib.auth import get_user_model
from django.contrib.auth.models import User
from django.db import transaction
from django.utils import timezone

from testing.demo.synthetic import consolidation_readings, demo_parameters, shear_readings
from testing.models import (
    Borehole,
    DirectShearTest,
    ForceUnit,
    LabProfile,
    Organisation,
    Project,
    Role,
    Sample,
    SampleStatus,
    SampleType,
    ShearStage,
)
from testing.services.accounts import lab_user_create
from testing.services.lifecycle import sample_transition
from testing.services.records import sample_receive, specimen_create
from testing.services.shear_setup import shear_test_create, stage_create, stage_readings_store
from testing.signals import demo_loaded

DEMO_PROJECT_REFERENCE = "TL-2026-014"
STANDARD_GRAVITY_M_S2 = 9.80665


@dataclass(frozen=True)
class DemoLogin:
    username: str
    role: str


DEMO_LOGINS = (
    DemoLogin("manager", "lab manager"),
    DemoLogin("technician", "technician"),
    DemoLogin("checker", "checker"),
    DemoLogin("engineer", "approving engineer"),
    DemoLogin("client-a", "client engineer, Fenwick Brae Consulting"),
    DemoLogin("client-b", "client engineer, Saltcoats Quay Developments (unrelated client)"),
)

# Status path for each demo sample: (borehole, ref, type, top m, base m, days ago received, final state, description)
_PATHS: dict[str, list[SampleStatus]] = {
    SampleStatus.RECEIVED: [],
    SampleStatus.SCHEDULED: [SampleStatus.SCHEDULED],
    SampleStatus.IN_TEST: [SampleStatus.SCHEDULED, SampleStatus.IN_TEST],
    SampleStatus.TESTED: [SampleStatus.SCHEDULED, SampleStatus.IN_TEST, SampleStatus.TESTED],
    SampleStatus.REPORTED: [
        SampleStatus.SCHEDULED,
        SampleStatus.IN_TEST,
        SampleStatus.TESTED,
        SampleStatus.REPORTED,
    ],
    SampleStatus.ON_HOLD: [SampleStatus.ON_HOLD],
    SampleStatus.DISPOSED: [
        SampleStatus.SCHEDULED,
        SampleStatus.IN_TEST,
        SampleStatus.TESTED,
        SampleStatus.REPORTED,
        SampleStatus.DISPOSED,
    ],
}

_SAMPLES = [
    (
        "BH101",
        "B3",
        SampleType.BULK,
        "2.00",
        "2.50",
        54,
        SampleStatus.DISPOSED,
        "Brown slightly gravelly fine to medium SAND.",
    ),
    (
        "BH101",
        "U5",
        SampleType.UNDISTURBED,
        "4.00",
        "4.45",
        49,
        SampleStatus.REPORTED,
        "Firm grey slightly sandy CLAY.",
    ),
    (
        "BH102",
        "U2",
        SampleType.UNDISTURBED,
        "1.50",
        "1.95",
        45,
        SampleStatus.REPORTED,
        "Firm brown mottled grey CLAY.",
    ),
    (
        "BH103",
        "B6",
        SampleType.BULK,
        "5.00",
        "5.50",
        41,
        SampleStatus.REPORTED,
        "Dense brown fine to medium SAND.",
    ),
    (
        "BH101",
        "B7",
        SampleType.BULK,
        "6.00",
        "6.50",
        36,
        SampleStatus.TESTED,
        "Dense orange-brown fine to coarse SAND.",
    ),
    (
        "BH102",
        "U4",
        SampleType.UNDISTURBED,
        "3.00",
        "3.45",
        31,
        SampleStatus.TESTED,
        "Firm to stiff grey silty CLAY.",
    ),
    (
        "BH103",
        "U3",
        SampleType.UNDISTURBED,
        "2.50",
        "2.95",
        27,
        SampleStatus.ON_HOLD,
        "Soft grey organic CLAY.",
    ),
    (
        "BH102",
        "B8",
        SampleType.BULK,
        "7.50",
        "8.00",
        20,
        SampleStatus.IN_TEST,
        "Medium dense brown gravelly SAND.",
    ),
    (
        "BH103",
        "U8",
        SampleType.UNDISTURBED,
        "8.00",
        "8.45",
        16,
        SampleStatus.IN_TEST,
        "Stiff grey CLAY with rare gravel.",
    ),
    (
        "BH101",
        "U9",
        SampleType.UNDISTURBED,
        "9.00",
        "9.45",
        11,
        SampleStatus.SCHEDULED,
        "Stiff dark grey CLAY.",
    ),
    (
        "BH102",
        "D10",
        SampleType.SMALL_DISTURBED,
        "10.00",
        "10.30",
        8,
        SampleStatus.SCHEDULED,
        "Grey sandy CLAY.",
    ),
    (
        "BH103",
        "B11",
        SampleType.BULK,
        "11.00",
        "11.50",
        4,
        SampleStatus.RECEIVED,
        "Brown clayey SAND.",
    ),
    (
        "BH101",
        "U12",
        SampleType.UNDISTURBED,
        "12.00",
        "12.45",
        1,
        SampleStatus.RECEIVED,
        "Very stiff grey CLAY.",
    ),
]

# Two complete test sets: the dense sand (recompacted, proving ring) and the firm clay (undisturbed, load cell).
_NORMAL_STRESSES_KPA = (50.0, 100.0, 200.0)
_BOX_MM = 60.0
_DIRECT_MASS_KG = 1.250  # top cap, grid plate, porous stone and yoke
_HANGER_MASS_KG = 0.500
_LEVER_RATIO = 10.0
_RING_CONSTANT_N_PER_DIV = 1.52


def _user(
    username: str, role: Role, password: str, first: str, last: str, org: Organisation | None = None
) -> User:
    user_model = get_user_model()
    existing = user_model.objects.filter(username=username).first()
    if existing is not None:
        existing.set_password(password)
        existing.save(update_fields=["password"])
        LabProfile.objects.get_or_create(user=existing)
        return existing
    return lab_user_create(
        username=username,
        password=password,
        roles=[role],
        organisation=org,
        first_name=first,
        last_name=last,
        email=f"{username}@example.invalid",
    )


def _weights_for(normal_stress_kpa: float) -> float:
    """Slotted weights [kg] that give about ``normal_stress_kpa`` on the 60 mm box through the lever."""
    force_n = normal_stress_kpa * _BOX_MM * _BOX_MM / 1000.0
    mass_kg = force_n / STANDARD_GRAVITY_M_S2
    return round((mass_kg - _DIRECT_MASS_KG) / _LEVER_RATIO - _HANGER_MASS_KG, 3)


@transaction.atomic
def load_demo(*, now: datetime | None = None) -> bool:
    """Create the demo scenario. Returns False (changing nothing but the demo passwords) if it exists."""
    now = now or timezone.now()
    password = settings.TAULINE_DEMO_PASSWORD
    org_a, _ = Organisation.objects.get_or_create(
        code="fenwick-brae",
        defaults={
            "name": "Fenwick Brae Consulting Engineers",
            "contact_name": "R. Okafor",
            "contact_email": "lab-results@fenwick-brae.example.invalid",
            "address": "4 Tannery Wynd, Harlow Moss, Northshire",
        },
    )
    org_b, _ = Organisation.objects.get_or_create(
        code="saltcoats-quay",
        defaults={
            "name": "Saltcoats Quay Developments",
            "contact_name": "M. Lindqvist",
            "contact_email": "engineering@saltcoats-quay.example.invalid",
        },
    )
    manager = _user("manager", Role.MANAGER, password, "Morven", "Ashby")
    technician = _user("technician", Role.TECHNICIAN, password, "Tomasz", "Reid")
    _user("checker", Role.CHECKER, password, "Chiara", "Dunmore")
    _user("engineer", Role.APPROVER, password, "Eilidh", "Navarro")
    _user("client-a", Role.CLIENT, password, "Rafe", "Okafor", org_a)
    _user("client-b", Role.CLIENT, password, "Mira", "Lindqvist", org_b)
    if Project.objects.filter(reference=DEMO_PROJECT_REFERENCE).exists():
        return False

    project = Project.objects.create(
        organisation=org_a,
        reference=DEMO_PROJECT_REFERENCE,
        client_reference="FB-4471",
        name="Harlow Moss link road — ground investigation",
        site_name="Harlow Moss link road",
        site_location="Harlow Moss, Northshire",
        client_engineer="R. Okafor",
        agreed_turnaround_days=21,
    )
    boreholes = {
        ref: Borehole.objects.create(
            project=project,
            reference=ref,
            ground_level_m=Decimal(gl),
            final_depth_m=Decimal("15.00"),
            drilled_on=(now - timedelta(days=60)).date(),
        )
        for ref, gl in (("BH101", "42.35"), ("BH102", "41.80"), ("BH103", "43.10"))
    }
    samples: dict[str, Sample] = {}
    for bh, ref, kind, top, base, days_ago, final, description in _SAMPLES:
        received_at = now - timedelta(days=days_ago, hours=3)
        sample = sample_receive(
            user=technician,
            borehole=boreholes[bh],
            reference=ref,
            depth_top_m=Decimal(top),
            depth_base_m=Decimal(base),
            sample_type=kind,
            description=description,
            at=received_at,
            received_on=received_at.date(),
            condition_on_receipt="Sealed, labelled, intact",
            storage_location=f"Store A / rack {days_ago % 7 + 1}",
        )
        for step, status in enumerate(_PATHS[final], start=1):
            note = {
                SampleStatus.ON_HOLD: "Awaiting client instruction on test schedule.",
                SampleStatus.DISPOSED: "Disposed after the retention period agreed with the client.",
            }.get(status, "")
            at = received_at + timedelta(days=2 * step, hours=step)
            sample_transition(
                sample=sample,
                to_status=status,
                user=manager if note else technician,
                note=note,
                at=min(at, now),
            )
        samples[ref] = sample

    _sand_set(project=project, sample=samples["B7"], user=technician, now=now)
    _clay_set(project=project, sample=samples["U4"], user=technician, now=now)
    _logger_set(project=project, sample=samples["U8"], user=technician, manager=manager, now=now)

    project_b = Project.objects.create(
        organisation=org_b,
        reference="TL-2026-019",
        name="Saltcoats quay wall — sea-bed sampling",
        site_name="Saltcoats quay",
        site_location="Saltcoats harbour",
        client_engineer="M. Lindqvist",
    )
    bh_b = Borehole.objects.create(
        project=project_b, reference="SQ1", final_depth_m=Decimal("8.00")
    )
    for ref, top, days_ago in (("U1", "2.00", 12), ("U2", "4.00", 5)):
        at = now - timedelta(days=days_ago)
        sample_receive(
            user=technician,
            borehole=bh_b,
            reference=ref,
            depth_top_m=Decimal(top),
            depth_base_m=Decimal(top) + Decimal("0.45"),
            sample_type=SampleType.UNDISTURBED,
            description="Soft grey silty CLAY.",
            at=at,
            received_on=at.date(),
        )
    # Listeners (the reports app adds a demo report) run after the commit: the computations queued
    # above are handed over first, and anything they write is outside this transaction.
    transaction.on_commit(
        lambda: demo_loaded.send(
            sender=load_demo, project_reference=project.reference, password=password, now=now
        )
    )
    return True


_SPECIMEN_HEIGHT_MM = 20.0


def _specimen_masses(
    height_mm: float, dry_density: float, water_content: float
) -> tuple[float, float]:
    volume_cm3 = _BOX_MM * _BOX_MM * height_mm / 1000.0
    dry_g = dry_density * volume_cm3
    return round(dry_g * (1 + water_content), 2), round(dry_g, 2)


def _lever_stage(
    *,
    user: User,
    test: DirectShearTest,
    sample: Sample,
    number: int,
    sigma: float,
    dry_density: float,
    water_content: float,
    final_ratio: float,
    specimen: dict[str, Any],
    stage: dict[str, Any],
) -> ShearStage:
    """One 60 mm × 20 mm specimen and its lever-loaded stage at about ``sigma`` [kPa].

    ``specimen`` and ``stage`` carry what differs between the demo's soils (preparation, depth,
    particle data; force device, rate, dates).
    """
    height = _SPECIMEN_HEIGHT_MM
    initial, dry = _specimen_masses(height, dry_density, water_content)
    created = specimen_create(
        user=user,
        sample=sample,
        reference=f"S{number}",
        length_mm=_BOX_MM,
        width_mm=_BOX_MM,
        height_mm=height,
        initial_mass_g=initial,
        dry_mass_g=dry,
        final_mass_g=round(dry * final_ratio, 2),
        description=sample.description,
        **specimen,
    )
    return stage_create(
        user=user,
        test=test,
        specimen=created,
        stage_number=number,
        direct_mass_kg=_DIRECT_MASS_KG,
        hanger_mass_kg=_HANGER_MASS_KG,
        weights_mass_kg=_weights_for(sigma),
        lever_ratio=_LEVER_RATIO,
        **stage,
    )


def _sand_set(
    *, project: Project, sample: Sample, user: User, now: datetime, reference: str = "DS-01"
) -> DirectShearTest:
    params = demo_parameters()["dense_sand"]
    test = shear_test_create(
        user=user,
        project=project,
        reference=reference,
        method="bs-1377-7",
        apparatus="SB-2 (60 mm)",
        box_length_mm=_BOX_MM,
        box_width_mm=_BOX_MM,
        condition="submerged",
        requested_on=(now - timedelta(days=34)).date(),
        due_on=(now - timedelta(days=34) + timedelta(days=21)).date(),
        instructions="Peak and ultimate strength, recompacted to 95 % of maximum dry density.",
    )
    tested = now - timedelta(days=31)
    for number, sigma in enumerate(_NORMAL_STRESSES_KPA, start=1):
        stage = _lever_stage(
            user=user,
            test=test,
            sample=sample,
            number=number,
            sigma=sigma,
            dry_density=1.74 + 0.005 * number,
            water_content=0.11,
            final_ratio=1.19,
            specimen={
                "depth_top_m": sample.depth_top_m,
                "preparation": "recompacted",
                "target_dry_density_mg_m3": Decimal("1.750"),
                "max_particle_size_mm": 2.0,
                "particle_density_mg_m3": 2.65,
                "particle_density_assumed": True,
            },
            stage={
                "force_unit": ForceUnit.DIVISIONS,
                "force_factor_n_per_unit": _RING_CONSTANT_N_PER_DIV,
                "rate_mm_per_min": params.rate_mm_per_min,
                # One stage after another on one day: consolidated for an hour, then sheared.
                "consolidation_started_at": tested + timedelta(hours=3 * (number - 1)),
                "shear_started_at": tested + timedelta(hours=3 * (number - 1) + 1),
            },
        )
        _store_readings(
            stage,
            "dense_sand",
            sigma,
            _SPECIMEN_HEIGHT_MM,
            seed=100 + number,
            ring=_RING_CONSTANT_N_PER_DIV,
            user=user,
        )
    return test


def _clay_set(*, project: Project, sample: Sample, user: User, now: datetime) -> DirectShearTest:
    params = demo_parameters()["clay"]
    test = shear_test_create(
        user=user,
        project=project,
        reference="DS-02",
        method="iso-17892-10",
        apparatus="SB-4 (60 mm, load cell)",
        box_length_mm=_BOX_MM,
        box_width_mm=_BOX_MM,
        condition="submerged",
        requested_on=(now - timedelta(days=30)).date(),
        due_on=(now - timedelta(days=30) + timedelta(days=21)).date(),
        instructions="Drained peak strength on undisturbed specimens.",
    )
    tested = now - timedelta(days=27)
    for number, sigma in enumerate(_NORMAL_STRESSES_KPA, start=1):
        stage = _lever_stage(
            user=user,
            test=test,
            sample=sample,
            number=number,
            sigma=sigma,
            dry_density=1.52 - 0.004 * number,
            water_content=0.27,
            final_ratio=1.23,
            specimen={
                "depth_top_m": sample.depth_top_m + Decimal("0.05") * number,
                "preparation": "undisturbed",
                "max_particle_size_mm": 0.5,
                "particle_density_mg_m3": 2.70,
                "particle_density_assumed": False,
            },
            stage={
                "force_unit": ForceUnit.NEWTON,
                "force_factor_n_per_unit": 1.0,
                "rate_mm_per_min": params.rate_mm_per_min,
                # A stage a day: consolidated overnight, sheared slowly the next day.
                "consolidation_started_at": tested + timedelta(days=number - 1),
                "shear_started_at": tested + timedelta(days=number),
            },
        )
        _store_readings(
            stage, "clay", sigma, _SPECIMEN_HEIGHT_MM, seed=200 + number, ring=None, user=user
        )
    return test


def _store_readings(
    stage: ShearStage,
    soil: str,
    sigma: float,
    height: float,
    *,
    seed: int,
    ring: float | None,
    user: User,
) -> None:
    params = demo_parameters()[soil]  # type: ignore[index]
    consolidation = consolidation_readings(
        seed=seed,
        normal_stress_kpa=sigma,
        height_mm=height,
        t50_min=params.t50_min,
        final_settlement_mm=params.settlement_per_100_kpa_mm * sigma / 100.0,
    )
    shear = shear_readings(
        seed=seed,
        soil=params.soil,
        normal_stress_kpa=sigma,
        rate_mm_per_min=params.rate_mm_per_min,
        phi_peak_deg=params.phi_peak_deg,
        phi_cv_deg=params.phi_cv_deg,
        cohesion_kpa=params.cohesion_kpa,
        displacement_to_peak_mm=params.displacement_to_peak_mm,
        max_dilation_deg=params.max_dilation_deg,
        contraction_mm=params.contraction_mm,
        ring_constant_n_per_div=ring,
    )
    force = shear.ring_divisions if shear.ring_divisions is not None else shear.shear_force_n
    rows = [
        (1, i, float(t), float(x), float(y), float(f))
        for i, (t, x, y, f) in enumerate(
            zip(shear.elapsed_min, shear.horizontal_mm, shear.vertical_mm, force, strict=True),
            start=1,
        )
    ]
    stage_readings_store(
        user=user,
        stage=stage,
        consolidation=[
            (float(t), float(s))
            for t, s in zip(consolidation.elapsed_min, consolidation.settlement_mm, strict=True)
        ],
        shear=rows,
    )
    assert math.isfinite(rows[-1][3])


# --- Equipment register and logger files (an expired calibration shows its flag) ----------------

_LOGGER_LAYOUT_NAME = "Bench logger export (semicolon; min, in, kN)"
# DS-03 is sheared slowly enough for drained conditions under its method's rate check (the limit
# comes out near 0.0095 mm/min for this clay's t50), so its only flag is the expired calibration.
_LOGGER_RATE_MM_PER_MIN = 0.006


def _logger_set(
    *, project: Project, sample: Sample, user: User, manager: User, now: datetime
) -> DirectShearTest:
    """Test set DS-03: readings arrive as logger files (two layouts), force from a load cell whose
    calibration had expired on the test date — its stages carry the CALIBRATION_EXPIRED flag."""
    from django.core.files.base import ContentFile

    from testing.services.equipment import (
        apparatus_create,
        calibration_record_create,
        force_device_create,
        stage_calibration_link,
    )
    from testing.services.imports import import_layout_save, stage_readings_import

    params = demo_parameters()["clay"]
    tested_on = now - timedelta(days=14)  # after the sample arrived (16 days ago)
    machine = apparatus_create(
        user=manager,
        reference="SB-6",
        description="60 mm square box, servo-driven, lever-loaded",
        box_length_mm=_BOX_MM,
        box_width_mm=_BOX_MM,
        lever_ratio=_LEVER_RATIO,
        hanger_mass_kg=_HANGER_MASS_KG,
        mass_tolerance_pct=0.1,
        lever_ratio_tolerance=0.02,
        box_dimension_tolerance_mm=0.05,
        verified_on=(now - timedelta(days=200)).date(),
        verification_due_on=(now + timedelta(days=165)).date(),
    )
    cell = force_device_create(
        user=manager,
        reference="LC-12",
        kind="load_cell",
        capacity_n=2000.0,
        reading_unit="N",
        resolution=0.1,
        apparatus=machine,
    )
    calibration_record_create(
        user=manager,
        device=cell,
        certificate_number="FC-2025-0412",
        issuing_lab="Northshire Force Calibration Ltd",
        accreditation="invented accreditation no. 0000",
        calibrated_on=(now - timedelta(days=410)).date(),
        due_on=(now - timedelta(days=45)).date(),  # expired before the test date
        model="polynomial",
        coefficients=[0.35, 0.9982, 2.1e-6],
        range_min=0.0,
        range_max=2000.0,
        expanded_uncertainty_n=1.8,
        coverage_factor_k=2.0,
    )
    canonical = None  # the built-in canonical CSV layout
    second = import_layout_save(
        user=user,
        name=_LOGGER_LAYOUT_NAME,
        description="Logger with a two-line preamble, decimal commas, inches and kN, "
        "gauge readings downward positive, one clock for both phases.",
        columns={
            "time": {"column": "Elapsed (min)", "unit": "min"},
            "horizontal": {"column": "Horiz (in)", "unit": "in"},
            "vertical": {"column": "Vert (in)", "unit": "in"},
            "force": {"column": "Load (kN)", "unit": "kN"},
            "phase": {"column": "Stage"},
        },
        delimiter=";",
        decimal_comma=True,
        header_row=3,
        phase_values={"C": "consolidation", "S": "shear"},
        vertical_sign=-1,
        rebase_each_phase=True,
    )
    test = shear_test_create(
        user=user,
        project=project,
        reference="DS-03",
        method="astm-d3080",
        apparatus="SB-6 (60 mm, load cell LC-12)",
        apparatus_record=machine,
        box_length_mm=_BOX_MM,
        box_width_mm=_BOX_MM,
        requested_on=(now - timedelta(days=22)).date(),
        instructions="Drained peak strength; readings from the data logger.",
    )
    for number, sigma in enumerate(_NORMAL_STRESSES_KPA, start=1):
        stage = _lever_stage(
            user=user,
            test=test,
            sample=sample,
            number=number,
            sigma=sigma,
            dry_density=1.60 - 0.004 * number,
            water_content=0.24,
            final_ratio=1.20,
            specimen={
                "depth_top_m": sample.depth_top_m + Decimal("0.05") * number,
                "preparation": "undisturbed",
                "max_particle_size_mm": 2.0,
                "particle_density_mg_m3": 2.68,
                "particle_density_assumed": True,
            },
            stage={
                "force_unit": ForceUnit.NEWTON,
                "rate_mm_per_min": _LOGGER_RATE_MM_PER_MIN,
                # One specimen a day: each shears for about 28 h.
                "consolidation_started_at": tested_on + timedelta(days=number - 1),
                "shear_started_at": tested_on + timedelta(days=number - 1, hours=2),
            },
        )
        stage_calibration_link(user=user, stage=stage, device=cell)
        cons = consolidation_readings(
            seed=300 + number,
            normal_stress_kpa=sigma,
            height_mm=_SPECIMEN_HEIGHT_MM,
            t50_min=params.t50_min,
            final_settlement_mm=params.settlement_per_100_kpa_mm * sigma / 100.0,
        )
        shear = shear_readings(
            seed=300 + number,
            soil=params.soil,
            normal_stress_kpa=sigma,
            rate_mm_per_min=_LOGGER_RATE_MM_PER_MIN,
            phi_peak_deg=params.phi_peak_deg,
            phi_cv_deg=params.phi_cv_deg,
            cohesion_kpa=params.cohesion_kpa,
            displacement_to_peak_mm=params.displacement_to_peak_mm,
            max_dilation_deg=params.max_dilation_deg,
            contraction_mm=params.contraction_mm,
            ring_constant_n_per_div=None,
        )
        if number < 3:
            lines = [
                "time_s,horizontal_displacement_mm,vertical_displacement_mm,shear_force_n,phase"
            ]
            lines += [
                f"{60 * t:.1f},,{-s:.4f},,consolidation"
                for t, s in zip(cons.elapsed_min, cons.settlement_mm, strict=True)
            ]
            lines += [
                f"{60 * t:.1f},{x:.4f},{y:.4f},{f:.2f},shear"
                for t, x, y, f in zip(
                    shear.elapsed_min, shear.horizontal_mm, shear.vertical_mm, shear.shear_force_n,
                    strict=True,
                )
            ]  # fmt: skip
            name, layout = f"DS-03_S{number}_logger.csv", canonical
        else:
            start = (
                float(cons.elapsed_min[-1]) + 5.0
            )  # shearing starts 5 min after consolidation ends
            settled = float(cons.settlement_mm[-1])
            lines = ["Logger SN 40-117;Harlow Moss DS-03 S3", "Gauge zero at load-on;;;;"]
            lines.append("Elapsed (min);Horiz (in);Vert (in);Load (kN);Stage")
            lines += [
                f"{t:.3f};0;{s / 25.4:.6f};0;C".replace(".", ",")
                for t, s in zip(cons.elapsed_min, cons.settlement_mm, strict=True)
            ]
            lines += [
                f"{start + t:.3f};{x / 25.4:.6f};{(settled - y) / 25.4:.6f};{f / 1000:.5f};S".replace(".", ",")
                for t, x, y, f in zip(
                    shear.elapsed_min, shear.horizontal_mm, shear.vertical_mm, shear.shear_force_n,
                    strict=True,
                )
            ]  # fmt: skip
            name, layout = f"DS-03_S{number}_bench-logger.txt", second
        upload = ContentFile(("\r\n".join(lines) + "\r\n").encode(), name=name)
        record = stage_readings_import(user=user, stage=stage, upload=upload, layout=layout)
        if record.state != "succeeded":
            raise RuntimeError(
                f"demo logger file {name} did not import: {record.reason} {record.errors[:3]}"
            )
    return test
