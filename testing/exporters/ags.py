"""AGS4 export of a project's shear box work: PROJ, TRAN, UNIT, TYPE, ABBR, LOCA, SAMP, SHBG, SHBT.

Headings, units and data types come from the AGS4 standard dictionary shipped with python-ags4,
so each group's headings are in dictionary order (Rule 7) and carry the dictionary's unit and
type (Rule 8); UNIT, TYPE and ABBR list exactly what the file uses (Rules 15–17). The file is
written by python-ags4 (``dataframe_to_AGS4``) and must pass its checker with 0 errors.

Mapping (this project's choices, stated in the file's remarks):
- one SHBG row per test set and sample: SPEC_REF is the test set reference, SPEC_DPTH the
  shallowest specimen; each stage is an SHBT row (SHBT_TESN = stage number, its specimen
  reference in SHBT_REM), because AGS keys SHBT to its SHBG parent;
- SHBT_PDIN/RDIN: vertical displacement, upward (dilation) positive;
- SHBT_NORM: applied normal stress on the initial area; SHBT_PVST/RVST: normal stress at
  peak/residual under the set's area model;
- stages without results export their set-up data only (densities, height, applied stress).
"""

from __future__ import annotations

import tempfile
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import date
from pathlib import Path
from typing import Any

from django.conf import settings
from django.contrib.auth.models import User

from testing import access, selectors
from testing.analysis import AnalysisError, phase_relations
from testing.exporters.ags_dictionary import (
    AGS_VERSIONS,
    GROUP_HEADINGS,
    GROUP_ORDER,
    SHBG_CONDITIONS,
    SHBG_TYPES,
    TYPE_DESCRIPTIONS,
    UNIT_DESCRIPTIONS,
    ags_number,
    ags_text,
    dictionary_headings,
)
from testing.exporters.setup_values import applied_normal_stress_kpa, box_area_mm2
from testing.models import (
    DirectShearTest,
    EnvelopeResult,
    Preparation,
    Project,
    Sample,
    SampleType,
    ShearStage,
    StageResult,
)
from testing.models.direct_shear import MethodProfile, ShearType

# --- collecting the rows ------------------------------------------------------------------------


@dataclass
class AgsFile:
    """Rows per group as {heading: text}; written with :func:`write_ags`."""

    groups: dict[str, list[dict[str, str]]]
    abbreviations: dict[tuple[str, str], str]


def _sample_id(sample: Sample) -> str:
    return ags_text(f"{sample.borehole.reference}-{sample.depth_top_m}-{sample.reference}")


def _sample_keys(sample: Sample) -> dict[str, str]:
    return {
        "LOCA_ID": ags_text(sample.borehole.reference),
        "SAMP_TOP": ags_number(sample.depth_top_m, "2DP"),
        "SAMP_REF": ags_text(sample.reference),
        "SAMP_TYPE": ags_text(sample.sample_type),
        "SAMP_ID": _sample_id(sample),
    }


def _phase_values(stage: ShearStage, area_mm2: float) -> dict[str, Any]:
    """Initial densities, voids ratio and water contents from the specimen as set up."""
    sp = stage.specimen
    out: dict[str, Any] = {}
    volume_cm3 = area_mm2 * sp.height_mm / 1000.0
    if sp.dry_mass_g:
        out["mci"] = 100.0 * (sp.initial_mass_g - sp.dry_mass_g) / sp.dry_mass_g
        if sp.final_mass_g:
            out["mcf"] = 100.0 * (sp.final_mass_g - sp.dry_mass_g) / sp.dry_mass_g
        out["bden"] = sp.initial_mass_g / volume_cm3
        out["dden"] = sp.dry_mass_g / volume_cm3
        if sp.particle_density_mg_m3:
            try:
                state = phase_relations(
                    wet_mass_g=sp.initial_mass_g,
                    dry_mass_g=sp.dry_mass_g,
                    volume_cm3=volume_cm3,
                    particle_density_mg_m3=sp.particle_density_mg_m3,
                    particle_density_measured=not sp.particle_density_assumed,
                )
                out["ivr"] = state.void_ratio
            except AnalysisError:
                pass
    else:
        out["bden"] = sp.initial_mass_g / volume_cm3
    return out


def _method(test: DirectShearTest) -> str:
    label = MethodProfile(test.method).label
    return ags_text(f"{label}:{test.method_edition}" if test.method_edition else label)


def _envelope_remark(envelope: EnvelopeResult | None, kind: str) -> str:
    if envelope is None:
        return ""
    return (
        f"{kind} c' and phi' by {ags_text(envelope.fit_method)} of {envelope.n} stages "
        f"(sigma' {envelope.normal_stress_min_kpa:.0f}-{envelope.normal_stress_max_kpa:.0f} kPa)."
    )


def collect_project(
    project: Project,
    tests: Iterable[DirectShearTest],
    samples: Iterable[Sample],
    *,
    ags_version: str,
    today: date,
) -> AgsFile:
    """Rows for every group, from the latest stored results (set-up data where none exist)."""
    abbreviations: dict[tuple[str, str], str] = {}
    lab = ags_text(settings.TAULINE_LAB_NAME)
    tests = list(tests)
    released = bool(tests) and all(t.released_at is not None for t in tests)
    groups: dict[str, list[dict[str, str]]] = {
        "PROJ": [
            {
                "PROJ_ID": ags_text(project.reference),
                "PROJ_NAME": ags_text(project.name),
                "PROJ_LOC": ags_text(project.site_location or project.site_name),
                "PROJ_CLNT": ags_text(project.organisation.name),
                "PROJ_ENG": ags_text(project.client_engineer),
            }
        ],
        "TRAN": [
            {
                "TRAN_ISNO": "1",
                "TRAN_DATE": today.isoformat(),
                "TRAN_PROD": lab,
                "TRAN_STAT": "Final" if released else "Preliminary",
                "TRAN_DESC": "Direct shear (shear box) test results",
                "TRAN_AGS": ags_version,
                "TRAN_RECV": ags_text(project.organisation.name),
                "TRAN_DLIM": "|",
                "TRAN_RCON": "+",
                "TRAN_REM": (
                    "Results apply only to the specimens tested. Design parameters are for a "
                    "qualified geotechnical engineer to select under local codes."
                ),
            }
        ],
        "LOCA": [],
        "SAMP": [],
        "SHBG": [],
        "SHBT": [],
    }
    samples = sorted(samples, key=lambda s: (s.borehole.reference, s.depth_top_m, s.reference))
    seen_boreholes: set[int] = set()
    for sample in samples:
        bh = sample.borehole
        if bh.pk not in seen_boreholes:
            seen_boreholes.add(bh.pk)
            groups["LOCA"].append(
                {
                    "LOCA_ID": ags_text(bh.reference),
                    "LOCA_NATE": ags_number(bh.easting_m, "2DP"),
                    "LOCA_NATN": ags_number(bh.northing_m, "2DP"),
                    "LOCA_GL": ags_number(bh.ground_level_m, "2DP"),
                    "LOCA_FDEP": ags_number(bh.final_depth_m, "2DP"),
                    "LOCA_STAR": bh.drilled_on.isoformat() if bh.drilled_on else "",
                }
            )
        abbreviations[("SAMP_TYPE", sample.sample_type)] = SampleType(sample.sample_type).label
        groups["SAMP"].append(
            {
                **_sample_keys(sample),
                "SAMP_BASE": ags_number(sample.depth_base_m, "2DP"),
                "SAMP_DESC": ags_text(sample.description),
            }
        )
    for test in tests:
        _collect_test(test, groups, abbreviations, lab)
    return AgsFile(groups=groups, abbreviations=abbreviations)


def _collect_test(
    test: DirectShearTest,
    groups: dict[str, list[dict[str, str]]],
    abbreviations: dict[tuple[str, str], str],
    lab: str,
) -> None:
    results: Mapping[int, StageResult] = selectors.latest_stage_results(test=test)
    envelopes = selectors.latest_envelopes(test=test)
    peak, residual = envelopes.get("peak"), envelopes.get("residual")
    area = box_area_mm2(test)
    stages = list(test.stages.select_related("specimen__sample__borehole").order_by("stage_number"))
    by_sample: dict[int, list[ShearStage]] = {}
    for stage in stages:
        by_sample.setdefault(stage.specimen.sample_id, []).append(stage)
    box_type = "SMALL SBOX" if test.box_length_mm <= 150 else "LARGE SBOX"
    abbreviations[("SHBG_TYPE", box_type)] = SHBG_TYPES[box_type]
    size = (
        f"{test.box_length_mm:g} mm diameter"
        if test.box_shape == "circular"
        else f"{test.box_length_mm:g} x {test.box_width_mm or test.box_length_mm:g} mm"
    )
    for sample_stages in by_sample.values():
        sample = sample_stages[0].specimen.sample
        specimens = [s.specimen for s in sample_stages]
        undisturbed = all(sp.preparation == Preparation.UNDISTURBED for sp in specimens)
        condition = "UNDISTURBED" if undisturbed else "REMOULDED"
        abbreviations[("SHBG_COND", condition)] = SHBG_CONDITIONS[condition]
        keys = {
            **_sample_keys(sample),
            "SPEC_REF": ags_text(test.reference),
            "SPEC_DPTH": ags_number(min(sp.depth_top_m for sp in specimens), "2DP"),
        }
        recompacted = [sp for sp in specimens if sp.preparation == Preparation.RECOMPACTED]
        conditions = [f"{test.get_condition_display()}"]
        if recompacted and recompacted[0].target_dry_density_mg_m3:
            conditions.append(
                f"recompacted to a target dry density of {recompacted[0].target_dry_density_mg_m3} Mg/m3"
            )
        groups["SHBG"].append(
            {
                **keys,
                "SPEC_DESC": ags_text(specimens[0].description or sample.description),
                "SPEC_PREP": ags_text(
                    "; ".join(
                        dict.fromkeys(
                            f"{sp.get_preparation_display()}"
                            + (f" ({sp.preparation_notes})" if sp.preparation_notes else "")
                            for sp in specimens
                        )
                    )
                ),
                "SHBG_TYPE": box_type,
                "SHBG_COND": condition,
                "SHBG_CONS": ags_text("; ".join(conditions)),
                "SHBG_PCOH": ags_number(peak.cohesion_kpa if peak else None, "2SF"),
                "SHBG_PHI": ags_number(peak.friction_angle_deg if peak else None, "1DP"),
                "SHBG_RCOH": ags_number(residual.cohesion_kpa if residual else None, "2SF"),
                "SHBG_RPHI": ags_number(residual.friction_angle_deg if residual else None, "1DP"),
                "SHBG_REM": ags_text(
                    " ".join(
                        filter(
                            None,
                            [
                                f"Test set {test.reference}; box {size}; area model "
                                f"{test.get_area_model_display().lower()}.",
                                _envelope_remark(peak, "Peak"),
                                _envelope_remark(residual, "Residual"),
                                "Vertical displacement upward (dilation) positive.",
                            ],
                        )
                    )
                ),
                "SHBG_METH": _method(test),
                "SHBG_LAB": lab,
                "TEST_STAT": "Released" if test.released_at else "Not yet released",
            }
        )
        for stage in sample_stages:
            result = results.get(stage.pk)
            phase = _phase_values(stage, area)
            sp = stage.specimen
            density = ""
            if sp.particle_density_mg_m3:
                density = (
                    "#" if sp.particle_density_assumed else ""
                ) + f"{sp.particle_density_mg_m3:.2f}"
            rate = stage.rate_mm_per_min
            if result is not None and result.measured_rate_mm_per_min:
                rate = result.measured_rate_mm_per_min
            groups["SHBT"].append(
                {
                    **keys,
                    "SHBT_TESN": str(stage.stage_number),
                    "SHBT_BDEN": ags_number(phase.get("bden"), "2DP"),
                    "SHBT_DDEN": ags_number(phase.get("dden"), "2DP"),
                    "SHBT_NORM": ags_number(applied_normal_stress_kpa(stage, area), "0DP"),
                    "SHBT_DISP": ags_number(rate, "2SF"),
                    "SHBT_REVS": (
                        str(stage.traverses) if test.shear_type == ShearType.REVERSALS else ""
                    ),
                    "SHBT_PEAK": ags_number(
                        result.failure_shear_stress_kpa if result else None, "1DP"
                    ),
                    "SHBT_RES": ags_number(
                        result.residual_shear_stress_kpa if result else None, "1DP"
                    ),
                    "SHBT_PDIS": ags_number(
                        result.failure_horizontal_mm if result else None, "2DP"
                    ),
                    "SHBT_RDIS": ags_number(
                        result.residual_horizontal_mm if result else None, "2DP"
                    ),
                    "SHBT_PDIN": ags_number(result.failure_vertical_mm if result else None, "2DP"),
                    "SHBT_RDIN": ags_number(result.residual_vertical_mm if result else None, "2DP"),
                    "SHBT_PDEN": density,
                    "SHBT_IVR": ags_number(phase.get("ivr"), "3DP"),
                    "SHBT_MCI": ags_number(phase.get("mci"), "1DP"),
                    "SHBT_MCF": ags_number(phase.get("mcf"), "1DP"),
                    "SHBT_HGT": ags_number(sp.height_mm, "2DP"),
                    "SHBT_CRIT": ags_text(result.failure_criterion if result else ""),
                    "SHBT_REM": ags_text(
                        f"Specimen {sp.reference}"
                        + ("" if result else "; not yet reduced: set-up data only")
                    ),
                    "SHBT_PVST": ags_number(
                        result.failure_normal_stress_kpa if result else None, "0DP"
                    ),
                    "SHBT_RVST": ags_number(
                        result.residual_normal_stress_kpa if result else None, "0DP"
                    ),
                }
            )


# --- writing ------------------------------------------------------------------------------------


def write_ags(content: AgsFile, *, ags_version: str) -> bytes:
    """The AGS4 file as bytes (ASCII, CR+LF), written by python-ags4."""
    import pandas as pd
    from python_ags4 import AGS4

    dictionary = dictionary_headings(ags_version)
    tables: dict[str, Any] = {}
    headings: dict[str, list[str]] = {}
    units_used: set[str] = set()
    types_used: set[str] = {"X"}  # UNIT, TYPE and ABBR themselves are text

    def add(group: str, names: Sequence[str], rows: list[dict[str, str]]) -> None:
        known = {h.name: h for h in dictionary[group]}
        ordered = [h.name for h in dictionary[group] if h.name in names]
        missing = [n for n in names if n not in known]
        if missing:
            raise ValueError(
                f"{group}: headings not in the AGS {ags_version} dictionary: {missing}"
            )
        unit_row = ["UNIT", *(known[n].unit for n in ordered)]
        type_row = ["TYPE", *(known[n].type for n in ordered)]
        units_used.update(u for u in unit_row[1:] if u)
        types_used.update(type_row[1:])
        data = [unit_row, type_row] + [["DATA", *(r.get(n, "") for n in ordered)] for r in rows]
        tables[group] = pd.DataFrame(data, columns=["HEADING", *ordered], dtype=object)
        headings[group] = ["HEADING", *ordered]

    for group in ("PROJ", "TRAN", "LOCA", "SAMP", "SHBG", "SHBT"):
        if content.groups.get(group) or group in ("PROJ", "TRAN"):
            add(group, GROUP_HEADINGS[group], content.groups.get(group, []))
    abbr = [
        {"ABBR_HDNG": h, "ABBR_CODE": ags_text(code), "ABBR_DESC": ags_text(desc)}
        for (h, code), desc in sorted(content.abbreviations.items())
    ]
    if abbr:
        add("ABBR", ("ABBR_HDNG", "ABBR_CODE", "ABBR_DESC"), abbr)
    add(
        "UNIT",
        ("UNIT_UNIT", "UNIT_DESC"),
        [{"UNIT_UNIT": u, "UNIT_DESC": UNIT_DESCRIPTIONS.get(u, u)} for u in sorted(units_used)],
    )
    add(
        "TYPE",
        ("TYPE_TYPE", "TYPE_DESC"),
        [{"TYPE_TYPE": t, "TYPE_DESC": TYPE_DESCRIPTIONS.get(t, t)} for t in sorted(types_used)],
    )
    ordered_tables = {g: tables[g] for g in GROUP_ORDER if g in tables}
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "export.ags"
        AGS4.dataframe_to_AGS4(
            ordered_tables, headings, str(path), encoding="ascii", warnings=False
        )
        return path.read_bytes()


def project_ags_export(
    *, user: User | None, project: Project, ags_version: str = "4.1.1", today: date | None = None
) -> bytes:
    """The project's AGS4 file. ``user`` None is the command line (everything); a user gets what
    they may see: staff everything, a client only released test sets of their own projects."""
    if ags_version not in AGS_VERSIONS:
        raise ValueError(f"AGS version must be one of {', '.join(AGS_VERSIONS)}")
    tests = DirectShearTest.objects.filter(project=project)
    samples = Sample.objects.filter(borehole__project=project)
    if user is not None:
        project = access.project_get_for_user(user=user, project_id=project.pk)
        tests = tests.filter(access.test_filter(user))
        samples = samples.filter(access.sample_filter(user))
    return write_ags(
        collect_project(
            project,
            tests.order_by("reference"),
            samples.select_related("borehole"),
            ags_version=ags_version,
            today=today or date.today(),
        ),
        ags_version=ags_version,
    )
