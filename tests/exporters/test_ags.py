"""AGS4 export → python-ags4's checker (0 errors, 4.1.1 and 4.2) → import round trip.

The external check is python-ags4's ``check_file``, the AGS Data Format Working Group's own
validator, run against the standard dictionaries it ships.
"""

from __future__ import annotations

from io import StringIO
from pathlib import Path
from typing import Any

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError
from django.http import Http404
from python_ags4 import AGS4

from testing.exporters.ags import project_ags_export
from testing.exporters.ags_dictionary import ags_number, ags_text
from testing.models import (
    Borehole,
    EnvelopeResult,
    ImportedShearTest,
    Project,
    Sample,
    StageResult,
)
from testing.selectors import latest_envelopes, latest_stage_results
from testing.services import computation
from testing.services.imports import ags_import_apply, ags_import_preview

pytestmark = pytest.mark.django_db


@pytest.fixture
def demo(django_capture_on_commit_callbacks: Any, settings: Any, tmp_path: Path) -> Project:
    """The demo scenario with every stage reduced and every envelope fitted."""
    settings.MEDIA_ROOT = tmp_path / "media"
    with django_capture_on_commit_callbacks(execute=True):  # runs the imports' reductions too
        call_command("loaddemo", stdout=StringIO())
    project = Project.objects.get(reference="TL-2026-014")
    from django.contrib.auth import get_user_model

    manager = get_user_model().objects.get(username="manager")
    for test in project.shear_tests.all():
        with django_capture_on_commit_callbacks(execute=True):
            computation.test_recompute_request(test=test, user=manager, reason="test")
    return project


def _check(path: Path, dictionary: str) -> tuple[int, dict[str, Any]]:
    errors = AGS4.check_file(str(path), standard_AGS4_dictionary=dictionary)
    return AGS4.count_errors(errors)[0], errors


def test_ags_numbers_follow_the_type_rules() -> None:
    # nDP: fixed decimals; nSF: significant figures without exponent (AGS4 TYPE group, 4.1.1).
    assert ags_number(24.8456, "1DP") == "24.8"
    assert ags_number(56.0, "0DP") == "56"
    assert ags_number(0.0204, "2SF") == "0.020"
    assert ags_number(13.4, "2SF") == "13"
    assert ags_number(1234.0, "2SF") == "1200"
    assert ags_number(9.96, "2SF") == "10"
    assert ags_number(-0.001, "2DP") == "0.00"
    assert ags_number(None, "2DP") == ags_number(float("nan"), "2DP") == ""
    assert ags_text("φ′ = 32°\r\nσ′ – τ") == "phi' = 32 deg sigma' - tau"


def test_export_passes_the_checker_with_zero_errors_for_411_and_42(
    demo: Project, tmp_path: Path
) -> None:
    assert StageResult.objects.filter(stage__test__project=demo).count() >= 6
    assert EnvelopeResult.objects.filter(test__project=demo, envelope_type="peak").exists()
    for version in ("4.1.1", "4.2"):
        path = tmp_path / f"export-{version}.ags"
        path.write_bytes(project_ags_export(user=None, project=demo, ags_version=version))
        for dictionary in ("4.1.1", "4.2"):
            count, errors = _check(path, dictionary)
            rules = {k: v for k, v in errors.items() if k.startswith("AGS Format Rule")}
            assert count == 0, (version, dictionary, rules)


def test_exported_values_are_the_latest_stored_results(demo: Project, tmp_path: Path) -> None:
    path = tmp_path / "export.ags"
    path.write_bytes(project_ags_export(user=None, project=demo))
    tables, _ = AGS4.AGS4_to_dataframe(str(path))
    shbg = tables["SHBG"].iloc[2:]
    shbt = tables["SHBT"].iloc[2:]
    test = demo.shear_tests.get(reference="DS-01")
    peak = latest_envelopes(test=test)["peak"]
    row = shbg[shbg["SPEC_REF"] == "DS-01"].iloc[0]
    assert row["SHBG_PHI"] == f"{peak.friction_angle_deg:.1f}"
    assert float(row["SHBG_PCOH"]) == pytest.approx(
        peak.cohesion_kpa, abs=0.5 + 0.05 * abs(peak.cohesion_kpa)
    )
    results = latest_stage_results(test=test)
    for stage in test.stages.all():
        r = results[stage.pk]
        line = shbt[(shbt["SPEC_REF"] == "DS-01") & (shbt["SHBT_TESN"] == str(stage.stage_number))]
        assert line.iloc[0]["SHBT_PEAK"] == f"{r.failure_shear_stress_kpa:.1f}"
        assert line.iloc[0]["SHBT_PDIS"] == f"{r.failure_horizontal_mm:.2f}"
    # Every data line is ASCII and ends in CR+LF (AGS Rules 1 and 2a).
    raw = path.read_bytes()
    raw.decode("ascii")
    assert raw.count(b"\n") == raw.count(b"\r\n")


def test_the_checker_catches_a_broken_file(demo: Project, tmp_path: Path) -> None:
    """Negative control: without kPa in UNIT the same file must fail Rule 15."""
    text = project_ags_export(user=None, project=demo).decode("ascii")
    broken = tmp_path / "broken.ags"
    broken.write_text(text.replace('"DATA","kPa","kilopascal"\r\n', ""), newline="")
    count, errors = _check(broken, "4.1.1")
    assert count > 0 and "AGS Format Rule 15" in errors


def test_round_trip_export_check_import(demo: Project, tmp_path: Path) -> None:
    from django.contrib.auth import get_user_model

    technician = get_user_model().objects.get(username="technician")
    data = project_ags_export(user=None, project=demo)
    target = Project.objects.create(
        organisation=demo.organisation, reference="TL-2026-099", name="Round trip"
    )
    plan = ags_import_preview(user=technician, project=target, data=data)
    assert plan.ok, plan.report()
    assert Borehole.objects.filter(project=target).count() == 0  # a preview saves nothing
    ags_import_apply(user=technician, project=target, data=data, filename="export.ags")
    source = {
        (s.borehole.reference, s.reference, s.depth_top_m, s.depth_base_m, s.sample_type)
        for s in Sample.objects.filter(borehole__project=demo).select_related("borehole")
    }
    copied = {
        (s.borehole.reference, s.reference, s.depth_top_m, s.depth_base_m, s.sample_type)
        for s in Sample.objects.filter(borehole__project=target).select_related("borehole")
    }
    assert copied == source
    imported = ImportedShearTest.objects.filter(sample__borehole__project=target)
    assert imported.count() == demo.shear_tests.count()
    for item in imported:
        test = demo.shear_tests.get(reference=item.specimen_reference)
        peak = latest_envelopes(test=test)["peak"]
        assert item.peak_friction_angle_deg == pytest.approx(peak.friction_angle_deg, abs=0.05)
        assert len(item.stages) == test.stages.count()
        assert item.source_lab  # marked with the lab it came from
    # Importing the same file again changes nothing: everything exists already.
    again = ags_import_preview(user=technician, project=target, data=data)
    assert again.ok and not again.new_boreholes and all(s.exists for s in again.samples)
    # And the re-export of the copy passes the checker too.
    path = tmp_path / "copy.ags"
    path.write_bytes(project_ags_export(user=None, project=target))
    assert _check(path, "4.2")[0] == 0


def test_a_bad_file_is_reported_and_nothing_is_saved(demo: Project) -> None:
    from django.contrib.auth import get_user_model

    technician = get_user_model().objects.get(username="technician")
    text = project_ags_export(user=None, project=demo).decode("ascii")
    bad = text.replace('"BH102","1.50","U2","U"', '"BH102","1.50","U2","ZZ"', 1)
    target = Project.objects.create(
        organisation=demo.organisation, reference="TL-2026-098", name="Bad"
    )
    plan = ags_import_preview(user=technician, project=target, data=bad.encode())
    assert not plan.ok
    assert any("ZZ" in f.message for f in plan.findings)
    from testing.services.errors import ServiceError

    with pytest.raises(ServiceError, match="not imported"):
        ags_import_apply(user=technician, project=target, data=bad.encode(), filename="bad.ags")
    assert not Borehole.objects.filter(project=target).exists()


def test_management_commands_export_and_import(demo: Project, tmp_path: Path) -> None:
    out = tmp_path / "cmd.ags"
    call_command("ags_export", "--project", "TL-2026-014", "--output", str(out), stdout=StringIO())
    assert _check(out, "4.1.1")[0] == 0
    with pytest.raises(CommandError, match="No project"):
        call_command("ags_export", "--project", "NOPE", "--output", str(out), stdout=StringIO())
    Project.objects.create(organisation=demo.organisation, reference="TL-2026-097", name="Cmd")
    report = StringIO()
    call_command(
        "ags_import", str(out), "--user", "technician", "--project", "TL-2026-097", "--dry-run",
        stdout=report,
    )  # fmt: skip
    assert "0 error(s)" in report.getvalue() and "Dry run" in report.getvalue()
    assert not Borehole.objects.filter(project__reference="TL-2026-097").exists()
    call_command(
        "ags_import",
        str(out),
        "--user",
        "technician",
        "--project",
        "TL-2026-097",
        stdout=StringIO(),
    )
    assert Borehole.objects.filter(project__reference="TL-2026-097").count() == 3


def test_clients_export_only_what_they_may_see(demo: Project) -> None:
    from django.contrib.auth import get_user_model

    users = get_user_model().objects
    with pytest.raises(Http404):
        project_ags_export(user=users.get(username="client-b"), project=demo)
    text = project_ags_export(user=users.get(username="client-a"), project=demo).decode("ascii")
    assert '"GROUP","SAMP"' in text
    # Only test sets a signed report has released reach the client (the demo issues DS-01 only).
    released = set(
        demo.shear_tests.filter(released_at__isnull=False).values_list("reference", flat=True)
    )
    unreleased = set(
        demo.shear_tests.filter(released_at__isnull=True).values_list("reference", flat=True)
    )
    assert released and unreleased
    shbg_section = text.split('"GROUP","SHBG"')[1].split('"GROUP","SHBT"')[0]
    shown = {ref for ref in released | unreleased if f'"{ref}"' in shbg_section}
    assert shown == released
