"""AGS4 in: locations (LOCA), samples (SAMP) and another lab's shear box results (SHBG/SHBT).

:func:`plan_ags_import` reads the file, runs python-ags4's checker, and works out what an
import would do to a project — which boreholes and samples are new, which already exist, which
shear box results would be stored as imported — and every problem, before anything is saved.
The service (``testing.services.imports.ags_import_apply``) carries the plan out only if the
report has no errors.
"""

from __future__ import annotations

import math
import tempfile
from dataclasses import dataclass, field
from decimal import Decimal, InvalidOperation
from pathlib import Path
from typing import Any

from testing.models import Borehole, DirectShearTest, Project, Sample, SampleType


@dataclass(frozen=True)
class Finding:
    """One line of the validation report."""

    severity: str  # "error" stops the import; "note" is for information
    group: str
    line: int | None
    message: str

    def __str__(self) -> str:
        where = f"{self.group} line {self.line}" if self.line else self.group
        return f"{self.severity.upper()}: {where}: {self.message}"


@dataclass
class PlannedSample:
    loca_id: str
    reference: str
    sample_type: str
    depth_top_m: Decimal
    depth_base_m: Decimal
    description: str
    exists: bool


@dataclass
class PlannedShearTest:
    sample_key: tuple[str, str]
    specimen_reference: str
    specimen_depth_m: Decimal
    source_lab: str
    method: str
    test_type: str
    condition: str
    peak_cohesion_kpa: float | None
    peak_friction_angle_deg: float | None
    residual_cohesion_kpa: float | None
    residual_friction_angle_deg: float | None
    remarks: str
    stages: list[dict[str, Any]]


@dataclass
class AgsImportPlan:
    """What an import would do, and the report a person reads before saying yes."""

    project_reference: str
    ags_version: str
    checker_errors: int = 0
    findings: list[Finding] = field(default_factory=list)
    new_boreholes: list[dict[str, Any]] = field(default_factory=list)
    samples: list[PlannedSample] = field(default_factory=list)
    shear_tests: list[PlannedShearTest] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not any(f.severity == "error" for f in self.findings)

    def error(self, group: str, line: int | None, message: str) -> None:
        self.findings.append(Finding("error", group, line, message))

    def note(self, group: str, line: int | None, message: str) -> None:
        self.findings.append(Finding("note", group, line, message))

    def report(self) -> str:
        new_samples = sum(1 for s in self.samples if not s.exists)
        lines = [
            f"AGS {self.ags_version or '?'} file for project {self.project_reference or '?'}: "
            f"{len(self.new_boreholes)} new location(s), {new_samples} new sample(s), "
            f"{len(self.samples) - new_samples} existing sample(s), "
            f"{len(self.shear_tests)} shear box result set(s) to store as imported from another lab.",
            f"{sum(1 for f in self.findings if f.severity == 'error')} error(s).",
        ]
        lines.extend(str(f) for f in self.findings)
        return "\n".join(lines)


def _number(value: str) -> float | None:
    text = (value or "").strip().lstrip("#")
    if not text:
        return None
    try:
        x = float(text)
    except ValueError:
        return None
    return x if math.isfinite(x) else None


def _decimal(value: str) -> Decimal | None:
    try:
        d = Decimal((value or "").strip())
    except InvalidOperation:
        return None
    return d.quantize(Decimal("0.01")) if d.is_finite() else None


def _checker(
    data: bytes,
) -> tuple[dict[str, Any], dict[str, Any], dict[str, list[str]], dict[str, Any]]:
    """python-ags4's rule check and its tables (all values as text, UNIT/TYPE rows first)."""
    from python_ags4 import AGS4

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "upload.ags"
        path.write_bytes(data)
        errors = AGS4.check_file(str(path))
        tables, headings, line_numbers = AGS4.AGS4_to_dataframe(str(path), get_line_numbers=True)
    return errors, tables, headings, line_numbers


def _rows(
    tables: dict[str, Any], group: str, line_numbers: dict[str, Any]
) -> list[tuple[int | None, dict[str, str]]]:
    if group not in tables:
        return []
    df = tables[group]
    out: list[tuple[int | None, dict[str, str]]] = []
    lines = line_numbers.get(group) if isinstance(line_numbers, dict) else None
    for i, row in enumerate(df.iloc[2:].to_dict("records")):
        line = None
        if lines is not None:
            try:
                line = int(list(lines)[i + 2])
            except (IndexError, TypeError, ValueError):
                line = None
        out.append((line, {k: ("" if v is None else str(v)) for k, v in row.items()}))
    return out


def plan_ags_import(data: bytes, *, project: Project, own_lab_name: str) -> AgsImportPlan:
    """Check the file and plan the import into ``project``; changes nothing."""
    try:
        errors, tables, _, line_numbers = _checker(data)
    except Exception as exc:  # python-ags4 raises assorted errors for files that are not AGS4
        plan = AgsImportPlan(project_reference="", ags_version="")
        plan.error("FILE", None, f"Not a readable AGS4 file: {exc}")
        return plan
    proj = _rows(tables, "PROJ", line_numbers)
    tran = _rows(tables, "TRAN", line_numbers)
    plan = AgsImportPlan(
        project_reference=proj[0][1].get("PROJ_ID", "") if proj else "",
        ags_version=tran[0][1].get("TRAN_AGS", "") if tran else "",
    )
    for rule, items in errors.items():
        if rule.startswith("AGS Format Rule"):
            for item in items:
                plan.checker_errors += 1
                line = item.get("line")
                plan.error(
                    str(item.get("group") or rule),
                    int(line) if str(line).isdigit() else None,
                    f"{rule}: {item.get('desc', '')}",
                )
    if plan.project_reference and plan.project_reference != project.reference:
        plan.note(
            "PROJ",
            proj[0][0],
            f"The file's project is {plan.project_reference}; importing into {project.reference}.",
        )

    boreholes = {b.reference: b for b in Borehole.objects.filter(project=project)}
    file_locations: set[str] = set()
    for line, row in _rows(tables, "LOCA", line_numbers):
        loca = row.get("LOCA_ID", "").strip()
        if not loca:
            plan.error("LOCA", line, "LOCA_ID is empty.")
            continue
        file_locations.add(loca)
        if loca in boreholes:
            continue
        plan.new_boreholes.append(
            {
                "reference": loca,
                "ground_level_m": _decimal(row.get("LOCA_GL", "")),
                "easting_m": _decimal(row.get("LOCA_NATE", "")),
                "northing_m": _decimal(row.get("LOCA_NATN", "")),
                "final_depth_m": _decimal(row.get("LOCA_FDEP", "")),
            }
        )

    existing = {
        (s.borehole.reference, s.reference): s
        for s in Sample.objects.filter(borehole__project=project).select_related("borehole")
    }
    planned: dict[tuple[str, str], PlannedSample] = {}
    for line, row in _rows(tables, "SAMP", line_numbers):
        key = (row.get("LOCA_ID", "").strip(), row.get("SAMP_REF", "").strip())
        top, base = _decimal(row.get("SAMP_TOP", "")), _decimal(row.get("SAMP_BASE", ""))
        kind = row.get("SAMP_TYPE", "").strip()
        if not all(key):
            plan.error("SAMP", line, "LOCA_ID and SAMP_REF are needed to identify a sample.")
            continue
        if key[0] not in file_locations and key[0] not in boreholes:
            plan.error(
                "SAMP", line, f"Location {key[0]} is neither in the file nor in the project."
            )
            continue
        if top is None or top < 0:
            plan.error("SAMP", line, f"SAMP_TOP {row.get('SAMP_TOP')!r} is not a depth in metres.")
            continue
        base = base if base is not None else top
        if base < top:
            plan.error("SAMP", line, f"SAMP_BASE {base} m is above SAMP_TOP {top} m.")
            continue
        if key in planned:
            plan.error("SAMP", line, f"Sample {key[0]}/{key[1]} appears twice.")
            continue
        found = existing.get(key)
        if found is not None:
            if found.depth_top_m != top:
                plan.error(
                    "SAMP",
                    line,
                    f"Sample {key[0]}/{key[1]} exists at {found.depth_top_m} m, the file says {top} m.",
                )
                continue
        elif kind not in SampleType.values:
            plan.error(
                "SAMP",
                line,
                f"Sample type {kind!r} is not one this lab records ({', '.join(SampleType.values)}).",
            )
            continue
        planned[key] = PlannedSample(
            loca_id=key[0],
            reference=key[1],
            sample_type=kind,
            depth_top_m=top,
            depth_base_m=base,
            description=row.get("SAMP_DESC", ""),
            exists=found is not None,
        )
    plan.samples = list(planned.values())
    _plan_shear(plan, tables, line_numbers, project, planned, own_lab_name)
    return plan


_SHBT_FIELDS = {
    "SHBT_NORM": "normal_stress_kpa",
    "SHBT_PEAK": "peak_shear_stress_kpa",
    "SHBT_RES": "residual_shear_stress_kpa",
    "SHBT_PDIS": "peak_horizontal_mm",
    "SHBT_RDIS": "residual_horizontal_mm",
    "SHBT_PDIN": "peak_vertical_mm",
    "SHBT_RDIN": "residual_vertical_mm",
    "SHBT_BDEN": "bulk_density_mg_m3",
    "SHBT_DDEN": "dry_density_mg_m3",
    "SHBT_DISP": "rate_mm_per_min",
    "SHBT_HGT": "height_mm",
    "SHBT_IVR": "initial_void_ratio",
    "SHBT_PVST": "peak_normal_stress_kpa",
    "SHBT_RVST": "residual_normal_stress_kpa",
}
_KEYS = ("LOCA_ID", "SAMP_TOP", "SAMP_REF", "SAMP_TYPE", "SAMP_ID", "SPEC_REF", "SPEC_DPTH")


def _plan_shear(
    plan: AgsImportPlan,
    tables: dict[str, Any],
    line_numbers: dict[str, Any],
    project: Project,
    samples: dict[tuple[str, str], PlannedSample],
    own_lab_name: str,
) -> None:
    stages: dict[tuple[str, ...], list[dict[str, Any]]] = {}
    for line, row in _rows(tables, "SHBT", line_numbers):
        stage: dict[str, Any] = {
            "stage": row.get("SHBT_TESN", ""),
            "remarks": row.get("SHBT_REM", ""),
        }
        for heading, name in _SHBT_FIELDS.items():
            raw = row.get(heading, "")
            value = _number(raw)
            if raw.strip() and value is None:
                plan.error("SHBT", line, f"{heading} {raw!r} is not a number.")
            stage[name] = value
        if stage["normal_stress_kpa"] is not None and stage["normal_stress_kpa"] <= 0:
            plan.error("SHBT", line, "SHBT_NORM: the normal stress must be greater than zero.")
        stage["criterion"] = row.get("SHBT_CRIT", "")
        stage["particle_density"] = row.get("SHBT_PDEN", "")
        stages.setdefault(tuple(row.get(k, "") for k in _KEYS), []).append(stage)
    own_tests = set(
        DirectShearTest.objects.filter(project=project).values_list("reference", flat=True)
    )
    for line, row in _rows(tables, "SHBG", line_numbers):
        key = (row.get("LOCA_ID", "").strip(), row.get("SAMP_REF", "").strip())
        lab = row.get("SHBG_LAB", "").strip()
        spec = row.get("SPEC_REF", "").strip()
        if key not in samples:
            plan.error("SHBG", line, f"Sample {key[0]}/{key[1]} is not in the file's SAMP group.")
            continue
        if lab and lab == own_lab_name and spec in own_tests:
            plan.note("SHBG", line, f"{spec} is this lab's own test set; left as it is.")
            continue
        depth = _decimal(row.get("SPEC_DPTH", ""))
        if depth is None:
            plan.error("SHBG", line, "SPEC_DPTH is not a depth in metres.")
            continue
        values = {}
        for heading in ("SHBG_PCOH", "SHBG_PHI", "SHBG_RCOH", "SHBG_RPHI"):
            raw = row.get(heading, "")
            values[heading] = _number(raw)
            if raw.strip() and values[heading] is None:
                plan.error("SHBG", line, f"{heading} {raw!r} is not a number.")
        phi = values["SHBG_PHI"]
        if phi is not None and not 0 <= phi < 90:
            plan.error("SHBG", line, f"SHBG_PHI {phi} deg is not an angle of friction.")
        plan.shear_tests.append(
            PlannedShearTest(
                sample_key=key,
                specimen_reference=spec,
                specimen_depth_m=depth,
                source_lab=lab,
                method=row.get("SHBG_METH", ""),
                test_type=row.get("SHBG_TYPE", ""),
                condition=row.get("SHBG_COND", ""),
                peak_cohesion_kpa=values["SHBG_PCOH"],
                peak_friction_angle_deg=phi,
                residual_cohesion_kpa=values["SHBG_RCOH"],
                residual_friction_angle_deg=values["SHBG_RPHI"],
                remarks=row.get("SHBG_REM", ""),
                stages=stages.get(tuple(row.get(k, "") for k in _KEYS), []),
            )
        )


def ags_project_reference(data: bytes) -> str:
    """PROJ_ID of an AGS4 file ('' if it has none or cannot be read)."""
    from python_ags4 import AGS4

    try:
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "upload.ags"
            path.write_bytes(data)
            tables, _ = AGS4.AGS4_to_dataframe(str(path), only_groups=["PROJ"])
        return (
            str(tables["PROJ"].iloc[2]["PROJ_ID"])
            if "PROJ" in tables and len(tables["PROJ"]) > 2
            else ""
        )
    except Exception:  # not an AGS4 file: the full check reports why
        return ""
