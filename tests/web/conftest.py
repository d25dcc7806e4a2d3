"""Fixtures for the page tests: a computed shear test set belonging to client A."""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass
from datetime import date
from decimal import Decimal
from typing import Any

import pytest

from testing.models import DirectShearTest, ShearStage, Specimen
from testing.services.computation import test_recompute_request
from testing.services.records import specimen_create
from testing.services.shear_setup import shear_test_create, stage_create, stage_readings_store
from tests.conftest import Cast, Records
from tests.web.browser_support import launch_chromium

NORMAL_STRESSES_KPA = (50.0, 100.0, 200.0)
BOX_MM = 60.0


@dataclass(frozen=True)
class ShearSet:
    test: DirectShearTest
    stages: list[ShearStage]
    specimens: list[Specimen]


def _shear_rows(sigma_kpa: float) -> list[tuple[int, int, float, float, float, float]]:
    """A smooth rise to a peak near 2 mm and a gentle fall: τ/σn peaks at tan 32°.
    Force in N on a 60 mm square box; 120 readings over 10 mm at 0.5 mm/min."""
    area_mm2 = BOX_MM * BOX_MM
    rows = []
    for i in range(121):
        x = 10.0 * i / 120
        shape = (x / 2.0) * math.exp(1.0 - x / 2.0) if x > 0 else 0.0
        ratio = math.tan(math.radians(32.0)) * (0.75 + 0.25 * shape) * (1 - math.exp(-3 * x))
        force_n = ratio * sigma_kpa * area_mm2 / 1000.0
        y = 0.04 * x - 0.002 * x * x
        rows.append((1, i + 1, x / 0.5, x, y, round(force_n, 2)))
    return rows


def _consolidation_rows() -> list[tuple[float, float]]:
    """Settlement following 1 − exp(−t/4 min) to 0.3 mm, read at the usual doubling times."""
    times = [0.0, 0.1, 0.25, 0.5, 1, 2, 4, 8, 15, 30, 60, 120]
    return [(t, round(0.3 * (1.0 - math.exp(-t / 4.0)), 4)) for t in times]


def make_shear_set(cast: Cast, records: Records, reference: str = "DS-A1") -> ShearSet:
    user = cast.technician
    test = shear_test_create(
        user=user,
        project=records.project,
        reference=reference,
        method="bs-1377-7",
        box_length_mm=BOX_MM,
        box_width_mm=BOX_MM,
        requested_on=date(2026, 11, 3),
        due_on=date(2026, 11, 24),
    )
    stages, specimens = [], []
    for number, sigma in enumerate(NORMAL_STRESSES_KPA, start=1):
        specimen = specimen_create(
            user=user,
            sample=records.sample,
            reference=f"{reference}-S{number}",
            depth_top_m=Decimal("1.20"),
            preparation="undisturbed",
            length_mm=BOX_MM,
            width_mm=BOX_MM,
            height_mm=20.0,
            initial_mass_g=150.0,
        )
        stage = stage_create(
            user=user,
            test=test,
            specimen=specimen,
            stage_number=number,
            loading="frame",
            applied_normal_stress_kpa=sigma,
            force_unit="N",
            force_factor_n_per_unit=1.0,
            rate_mm_per_min=0.5,
        )
        stage_readings_store(
            user=user, stage=stage, consolidation=_consolidation_rows(), shear=_shear_rows(sigma)
        )
        stages.append(stage)
        specimens.append(specimen)
    return ShearSet(test=test, stages=stages, specimens=specimens)


@pytest.fixture
def shear_set_a(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Any
) -> ShearSet:
    """Client A's three-stage set, reduced and fitted (runs execute on commit, in-process)."""
    shear_set = make_shear_set(cast, records_a)
    with django_capture_on_commit_callbacks(execute=True):
        test_recompute_request(test=shear_set.test, user=cast.technician, reason="fixture")
    return shear_set


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    """Debian's Chromium, one per test module (browser tests only)."""
    yield from launch_chromium()
