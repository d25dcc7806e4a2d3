"""Checks on a whole set, stored with its envelope: specimens sheared at normal stresses too close
together, and prepared specimens whose initial dry densities differ by more than the method's limit
(3 % of the mean for BS 1377-7 here; common practice for recompacted sets)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from testing.analysis import ANALYSIS_VERSION
from testing.models import EnvelopeResult, ShearStage, Specimen
from tests.conftest import Cast, Records
from tests.reports.conftest import _weights_kg, build_test_set, compute

pytestmark = pytest.mark.django_db


def _peak_codes(test: Any) -> set[str]:
    envelope = EnvelopeResult.objects.filter(test=test, envelope_type="peak").latest("id")
    assert envelope.analysis_version == ANALYSIS_VERSION
    return {w["code"] for w in envelope.warnings}


def _denser(test: Any, *, stage_number: int, factor: float) -> None:
    """The stage's specimen compacted denser: same volume, every mass times ``factor``."""
    specimen = Specimen.objects.get(stage__test=test, stage__stage_number=stage_number)
    Specimen.objects.filter(pk=specimen.pk).update(
        dry_mass_g=round(specimen.dry_mass_g * factor, 2),
        initial_mass_g=round(specimen.initial_mass_g * factor, 2),
        final_mass_g=round(specimen.final_mass_g * factor, 2),
    )


def test_an_even_set_at_distinct_stresses_has_neither_flag(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = build_test_set(user=cast.technician, project=records_a.project, sample=records_a.sample)
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    codes = _peak_codes(test)
    assert "DRY_DENSITY_SPREAD" not in codes
    assert "NORMAL_STRESSES_NOT_DISTINCT" not in codes


def test_close_stresses_and_uneven_compaction_are_flagged_on_the_envelope(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = build_test_set(user=cast.technician, project=records_a.project, sample=records_a.sample)
    # Stage 2 loaded to 52 kPa beside stage 1's 50 kPa (a gap of 1 % of the highest stress), and
    # stage 3's specimen 6 % denser than the others (ρd = dry mass / volume).
    ShearStage.objects.filter(test=test, stage_number=2).update(weights_mass_kg=_weights_kg(52.0))
    _denser(test, stage_number=3, factor=1.06)
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    codes = _peak_codes(test)
    assert {"DRY_DENSITY_SPREAD", "NORMAL_STRESSES_NOT_DISTINCT"} <= codes


def test_undisturbed_specimens_are_not_held_to_the_compaction_limit(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = build_test_set(user=cast.technician, project=records_a.project, sample=records_a.sample)
    Specimen.objects.filter(stage__test=test).update(
        preparation="undisturbed", target_dry_density_mg_m3=None
    )
    _denser(test, stage_number=3, factor=1.06)
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    assert "DRY_DENSITY_SPREAD" not in _peak_codes(test)
