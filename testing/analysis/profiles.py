"""Method profiles as data: what each standard edition says the calculations should use.

Standards are copyrighted; many clause contents below are recollections. Every field given
from memory is listed in the profile's ``from_memory`` tuple so the lab can check it against its
own licensed copy and override it with :func:`dataclasses.replace` — no code change needed.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

from .geometry import AreaModel

__all__ = [
    "AASHTO_T236",
    "ASTM_D3080_23",
    "BS_1377_7_1990",
    "BS_EN_ISO_17892_10_2018",
    "PROFILES",
    "MethodProfile",
]


@dataclass(frozen=True, slots=True)
class MethodProfile:
    """The rules of one method edition that the calculations depend on.

    Attributes
    ----------
    code, title, edition
        Identification, e.g. ``"ASTM D3080/D3080M"``, edition ``"23"``.
    time_to_failure_basis
        ``"t50"`` or ``"t100"`` from the consolidation stage, or ``None`` when not set.
    time_to_failure_factor
        t_f = factor × t50 (or t100). [-]
    min_time_to_failure_min
        Floor on t_f (e.g. clean free-draining sands), or ``None``. [min]
    displacement_at_failure_mm
        Default d_f when the user gives none. [mm]
    displacement_at_failure_fine_mm
        Default d_f for fine-grained normally or lightly overconsolidated soil, if different. [mm]
    area_model
        Area used for τ and σn.
    failure_criterion
        Default failure criterion (see :data:`.failure.CRITERION_LABELS`).
    stated_displacement_fraction
        "No clear peak" rule: τ at this fraction of the box length. [-]
    min_width_mm, min_thickness_mm
        Smallest specimen width/diameter and thickness. [mm]
    min_width_to_dmax, min_thickness_to_dmax
        Width/D_max and thickness/D_max limits. [-]
    min_width_to_thickness
        Width : thickness ratio. [-]
    dry_density_spread_pct
        Allowed spread of initial dry density within a set. [%]
    from_memory
        Names of the fields whose values are recollections, to be checked by the lab.
    sources
        Where the values come from.
    """

    code: str
    title: str
    edition: str
    time_to_failure_basis: Literal["t50", "t100"] | None
    time_to_failure_factor: float | None
    min_time_to_failure_min: float | None
    displacement_at_failure_mm: float | None
    displacement_at_failure_fine_mm: float | None
    area_model: AreaModel
    failure_criterion: str
    stated_displacement_fraction: float
    min_width_mm: float | None
    min_thickness_mm: float | None
    min_width_to_dmax: float | None
    min_thickness_to_dmax: float | None
    min_width_to_thickness: float | None
    dry_density_spread_pct: float = 3.0
    from_memory: tuple[str, ...] = ()
    sources: tuple[str, ...] = field(default=())


ASTM_D3080_23 = MethodProfile(
    code="ASTM D3080/D3080M",
    title="Direct Shear Test of Soils Under Consolidated Drained Conditions",
    edition="23",
    time_to_failure_basis="t50",
    time_to_failure_factor=50.0,
    min_time_to_failure_min=10.0,
    displacement_at_failure_mm=5.0,
    displacement_at_failure_fine_mm=12.0,
    area_model="nominal",
    failure_criterion="peak",
    stated_displacement_fraction=0.10,
    min_width_mm=50.0,
    min_thickness_mm=13.0,
    min_width_to_dmax=10.0,
    min_thickness_to_dmax=6.0,
    min_width_to_thickness=2.0,
    from_memory=(
        "min_time_to_failure_min",
        "displacement_at_failure_mm",
        "displacement_at_failure_fine_mm",
        "area_model",
        "stated_displacement_fraction",
        "min_width_mm",
        "min_thickness_mm",
        "min_width_to_dmax",
        "min_thickness_to_dmax",
        "min_width_to_thickness",
        "dry_density_spread_pct",
    ),
    sources=(
        "t_f = 50·t50 quoted from the standard by practitioners (second-hand)",
        "clause numbers §6.2.1/§6.2.2 (particle size) and §9.10 (rate) from the published scope",
        "t50 = t90/4.28 from the note under the rate clause (from memory)",
    ),
)

AASHTO_T236 = MethodProfile(
    code="AASHTO T 236",
    title="Direct Shear Test of Soils Under Consolidated Drained Conditions",
    edition="(edition to be set by the lab)",
    time_to_failure_basis="t50",
    time_to_failure_factor=50.0,
    min_time_to_failure_min=ASTM_D3080_23.min_time_to_failure_min,
    displacement_at_failure_mm=ASTM_D3080_23.displacement_at_failure_mm,
    displacement_at_failure_fine_mm=ASTM_D3080_23.displacement_at_failure_fine_mm,
    area_model="nominal",
    failure_criterion="peak",
    stated_displacement_fraction=0.10,
    min_width_mm=50.0,
    min_thickness_mm=13.0,
    min_width_to_dmax=10.0,
    min_thickness_to_dmax=6.0,
    min_width_to_thickness=2.0,
    from_memory=(*ASTM_D3080_23.from_memory, "edition"),
    sources=(
        "US highway counterpart of D3080; only the t_f = 50·t50 rule was seen (second-hand); "
        "other values assumed equal to D3080",
    ),
)

BS_1377_7_1990 = MethodProfile(
    code="BS 1377-7",
    title="Shear strength tests (total stress) — small and large shearbox",
    edition="1990",
    time_to_failure_basis="t100",
    time_to_failure_factor=12.7,
    min_time_to_failure_min=None,
    displacement_at_failure_mm=5.0,
    displacement_at_failure_fine_mm=None,
    area_model="nominal",
    failure_criterion="peak",
    stated_displacement_fraction=0.10,
    min_width_mm=60.0,
    min_thickness_mm=None,
    min_width_to_dmax=None,
    min_thickness_to_dmax=10.0,
    min_width_to_thickness=None,
    from_memory=(
        "time_to_failure_factor",
        "displacement_at_failure_mm",
        "stated_displacement_fraction",
        "min_width_mm",
        "min_thickness_to_dmax",
        "dry_density_spread_pct",
    ),
    sources=(
        "nominal area inferred from the single 'stress factor kPa/division' of Form 7C",
        "t_f = 12.7·t100 after Gibson & Henkel (1954), Géotechnique 4(1) (from memory)",
        "d_f 5 mm: displacement expected at peak, after Head, Manual of Soil Laboratory "
        "Testing Vol. 2 §12.7 (second-hand)",
    ),
)

BS_EN_ISO_17892_10_2018 = MethodProfile(
    code="BS EN ISO 17892-10",
    title="Laboratory testing of soil — Part 10: Direct shear tests",
    edition="2018",
    time_to_failure_basis=None,
    time_to_failure_factor=None,
    min_time_to_failure_min=None,
    displacement_at_failure_mm=None,
    displacement_at_failure_fine_mm=None,
    area_model="nominal",
    failure_criterion="peak",
    stated_displacement_fraction=0.10,
    min_width_mm=None,
    min_thickness_mm=None,
    min_width_to_dmax=None,
    min_thickness_to_dmax=None,
    min_width_to_thickness=None,
    from_memory=("area_model", "failure_criterion", "stated_displacement_fraction"),
    sources=(
        "scope: shearbox and ring shear, consolidated drained, ≥ 3 specimens, Annex B (verified)",
        "rate formula, specimen limits and area model NOT verified: the lab must set them from "
        "its copy of the standard",
    ),
)

#: All shipped profiles by code.
PROFILES: dict[str, MethodProfile] = {
    p.code: p for p in (ASTM_D3080_23, AASHTO_T236, BS_1377_7_1990, BS_EN_ISO_17892_10_2018)
}
