"""Specimen phase relations: initial, after consolidation, final.

w = Mw/Ms; ρ = M/V; ρd = Ms/V; e = ρs/ρd − 1; n = e/(1 + e); Sr = w·ρs/(e·ρw)
(textbook definitions, e.g. Craig's *Soil Mechanics*). After consolidation at constant plan
area: e_c = e0 − (ΔH/H0)·(1 + e0). Particle density is carried with whether it was measured or
assumed (AGS ``SHBT_PDEN`` prefixes an assumed value with ``#``). Sr > 100 % is a flag.
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import AnalysisError, as_positive_float, fmt
from .flags import Flag, check_saturation

__all__ = ["ConsolidatedState", "PhaseState", "consolidated_state", "phase_relations"]


@dataclass(frozen=True, slots=True)
class PhaseState:
    """Phase relations of one specimen at one moment.

    Attributes
    ----------
    water_content_pct, bulk_density_mg_m3, dry_density_mg_m3
        w [%], ρ and ρd [Mg/m³].
    void_ratio, porosity, saturation_pct
        e [-], n [-], Sr [%].
    particle_density_mg_m3, particle_density_measured
        ρs [Mg/m³] and whether it was measured (False: assumed).
    volume_cm3, dry_mass_g
        Specimen volume [cm³] and dry mass [g].
    flags
        Sr > 100 %, ρd ≥ ρs.
    """

    water_content_pct: float
    bulk_density_mg_m3: float
    dry_density_mg_m3: float
    void_ratio: float
    porosity: float
    saturation_pct: float
    particle_density_mg_m3: float
    particle_density_measured: bool
    volume_cm3: float
    dry_mass_g: float
    flags: tuple[Flag, ...] = ()

    @property
    def particle_density_label(self) -> str:
        """ρs as AGS writes it: ``"#2.65"`` when assumed."""
        return (
            "" if self.particle_density_measured else "#"
        ) + f"{self.particle_density_mg_m3:.2f}"


def phase_relations(
    *,
    wet_mass_g: float,
    dry_mass_g: float,
    volume_cm3: float,
    particle_density_mg_m3: float,
    particle_density_measured: bool,
    water_density_mg_m3: float = 1.0,
    label: str = "",
) -> PhaseState:
    """Phase relations from masses and volume (g and cm³, so g/cm³ = Mg/m³).

    Raises
    ------
    AnalysisError
        Non-positive masses or volume, or a dry mass above the wet mass.
    """
    m = as_positive_float(wet_mass_g, "Wet mass", "g")
    ms = as_positive_float(dry_mass_g, "Dry mass", "g")
    v = as_positive_float(volume_cm3, "Specimen volume", "cm³")
    rho_s = as_positive_float(particle_density_mg_m3, "Particle density", "Mg/m³")
    rho_w = as_positive_float(water_density_mg_m3, "Water density", "Mg/m³")
    if ms > m:
        raise AnalysisError(
            f"Dry mass {fmt(ms)} g is more than the wet mass {fmt(m)} g; check the weighings"
        )
    w = (m - ms) / ms
    rho = m / v
    rho_d = ms / v
    e = rho_s / rho_d - 1.0
    flags: list[Flag] = []
    if e <= 0.0:
        flags.append(
            Flag(
                "DRY_DENSITY_ABOVE_PARTICLE_DENSITY",
                "error",
                f"Dry density {rho_d:.3f} Mg/m³ is not below the particle density {rho_s:.3f} "
                "Mg/m³: check the volume, the masses or ρs",
                {"dry_density_mg_m3": rho_d, "particle_density_mg_m3": rho_s},
            )
        )
        sr = float("nan")
    else:
        sr = w * rho_s / (e * rho_w) * 100.0
        f = check_saturation(sr, label=label)
        if f is not None:
            flags.append(f)
    return PhaseState(
        w * 100.0,
        rho,
        rho_d,
        e,
        e / (1.0 + e),
        sr,
        rho_s,
        particle_density_measured,
        v,
        ms,
        tuple(flags),
    )


@dataclass(frozen=True, slots=True)
class ConsolidatedState:
    """State after consolidation at constant plan area.

    Attributes
    ----------
    height_mm, settlement_mm
        H_c = H0 − ΔH and ΔH (settlement positive). [mm]
    void_ratio, porosity, dry_density_mg_m3
        e_c, n_c [-], ρd,c [Mg/m³].
    """

    height_mm: float
    settlement_mm: float
    void_ratio: float
    porosity: float
    dry_density_mg_m3: float


def consolidated_state(
    initial: PhaseState, *, initial_height_mm: float, settlement_mm: float
) -> ConsolidatedState:
    """e_c = e0 − (ΔH/H0)·(1 + e0) and the matching dry density (plan area unchanged)."""
    h0 = as_positive_float(initial_height_mm, "Initial specimen height", "mm")
    if not settlement_mm < h0:
        raise AnalysisError(
            f"Settlement {fmt(settlement_mm)} mm is not less than the specimen height {fmt(h0)} mm"
        )
    e0 = initial.void_ratio
    ec = e0 - settlement_mm / h0 * (1.0 + e0)
    if ec <= 0.0:
        raise AnalysisError(
            f"Settlement {fmt(settlement_mm)} mm would leave a void ratio of {ec:.3f}; check the "
            "height, the settlement and the initial state"
        )
    hc = h0 - settlement_mm
    return ConsolidatedState(
        hc, float(settlement_mm), ec, ec / (1.0 + ec), initial.dry_density_mg_m3 * h0 / hc
    )
