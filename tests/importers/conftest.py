"""A test set with load-cell and proving-ring stages for the import tests, and logger files."""

from __future__ import annotations

from datetime import date
from typing import Any

import pytest

from testing.models import ShearStage
from testing.services.records import specimen_create
from testing.services.shear_setup import shear_test_create, stage_create
from tests.conftest import Cast, Records


def make_stage(cast: Cast, records: Records, number: int, **fields: Any) -> ShearStage:
    test = records.project.shear_tests.first() or shear_test_create(
        user=cast.technician,
        project=records.project,
        reference="DS-01",
        method="bs-1377-7",
        box_length_mm=60.0,
        box_width_mm=60.0,
        requested_on=date(2026, 11, 3),
    )
    specimen = specimen_create(
        user=cast.technician,
        sample=records.sample,
        reference=f"S{number}",
        depth_top_m=records.sample.depth_top_m,
        preparation="undisturbed",
        length_mm=60.0,
        width_mm=60.0,
        height_mm=20.0,
        initial_mass_g=140.0,
    )
    defaults: dict[str, Any] = {
        "direct_mass_kg": 1.25,
        "hanger_mass_kg": 0.5,
        "weights_mass_kg": 2.0,
        "lever_ratio": 10.0,
        "force_unit": "N",
    }
    defaults.update(fields)
    return stage_create(
        user=cast.technician, test=test, specimen=specimen, stage_number=number, **defaults
    )


@pytest.fixture
def load_cell_stage(cast: Cast, records_a: Records) -> ShearStage:
    return make_stage(cast, records_a, 1, force_unit="N")


@pytest.fixture
def ring_stage(cast: Cast, records_a: Records) -> ShearStage:
    return make_stage(cast, records_a, 2, force_unit="div", force_factor_n_per_unit=1.52)


HEADER = "time_s,horizontal_displacement_mm,vertical_displacement_mm,shear_force_n,phase"


def canonical_lines(n_shear: int = 500, n_cons: int = 0) -> list[str]:
    """An invented load-cell logger record: consolidation then shear rows, canonical layout."""
    lines = [HEADER]
    for i in range(n_cons):
        lines.append(f"{i * 30},,{-0.002 * i:.4f},,consolidation")
    for i in range(n_shear):
        x = 0.01 * i
        lines.append(f"{6 * i},{x:.3f},{0.0004 * i:.4f},{80 + 0.3 * i:.2f},shear")
    return lines


def as_bytes(lines: list[str]) -> bytes:
    return ("\r\n".join(lines) + "\r\n").encode()
