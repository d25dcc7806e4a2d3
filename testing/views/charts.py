"""Plotly figure descriptions (plain JSON-ready dicts) for the test-set page and the dashboard.

Per-reading curves come from the adapter's in-process reduction (``stage_reduction_compute``), the
envelope from the stored :class:`EnvelopeResult`. Every axis title carries its unit. The figures
are embedded as JSON data blocks and drawn by ``static/js/charts.js`` with the Plotly bundle served
from the installed ``plotly`` package.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from testing import analysis
from testing.models import EnvelopeResult, ShearStage
from testing.services.direct_shear import failure_point, stage_reduction_compute
from testing.services.stage_inputs import stage_inputs_load

# Our own palette: deep teal, ochre, plum, moss, brick, slate (distinct for colour-blind readers
# also by marker shape in the envelope).
PALETTE = ["#0f5c6e", "#b86e00", "#7a3b69", "#4f7a28", "#a33b2b", "#44546a"]
FONT = {"family": "system-ui, 'DejaVu Sans', sans-serif", "size": 13, "color": "#1c2733"}

Figure = dict[str, Any]


def layout_for(x_title: str, y_title: str, **extra: Any) -> dict[str, Any]:
    layout: dict[str, Any] = {
        "font": FONT,
        "margin": {"l": 64, "r": 16, "t": 24, "b": 64},
        "paper_bgcolor": "#ffffff",
        "plot_bgcolor": "#fbfcfd",
        "xaxis": {"title": {"text": x_title}, "zeroline": False, "gridcolor": "#e3e8ee"},
        "yaxis": {"title": {"text": y_title}, "zeroline": False, "gridcolor": "#e3e8ee"},
        "legend": {"orientation": "h", "y": -0.3, "yanchor": "top"},
        "hovermode": "closest",
    }
    layout.update(extra)
    return layout


def _floats(values: Any) -> list[float | None]:
    """JSON-safe floats (NaN and inf become gaps)."""
    out: list[float | None] = []
    for v in np.asarray(values, dtype=float).tolist():
        out.append(v if math.isfinite(v) else None)
    return out


# --- Stage curves --------------------------------------------------------------------------------


@dataclass(frozen=True)
class StageCurves:
    stage_number: int
    normal_stress_kpa: float
    horizontal_mm: list[float | None]
    vertical_mm: list[float | None]
    shear_stress_kpa: list[float | None]
    failure_horizontal_mm: float
    failure_shear_stress_kpa: float
    failure_vertical_mm: float
    consolidation_time_min: list[float]
    consolidation_settlement_mm: list[float]
    taylor: analysis.TaylorResult | None
    t100_min: float | None
    consolidation_note: str
    error: str = ""
    casagrande: analysis.CasagrandeResult | None = None
    casagrande_note: str = ""


def stage_curves(stage: ShearStage) -> StageCurves:
    """Per-reading curves and the consolidation construction of one stage (two queries)."""
    inputs = stage_inputs_load(stage)
    cons_t = [float(v) for v in inputs.consolidation_time_min]
    cons_d = [float(v) for v in inputs.consolidation_settlement_mm]
    taylor: analysis.TaylorResult | None = None
    t100: float | None = None
    note = ""
    if len(cons_t) >= 4:
        try:
            taylor = analysis.taylor_root_time(cons_t, cons_d)
            t100 = analysis.bs_t100_min(taylor)
        except analysis.AnalysisError as exc:
            note = str(exc)
    else:
        note = "Fewer than 4 consolidation readings: no root-time construction."
    casagrande: analysis.CasagrandeResult | None = None
    casagrande_note = ""
    try:
        casagrande = analysis.casagrande_log_time(cons_t, cons_d)
    except analysis.AnalysisError as exc:
        casagrande_note = str(exc)
    normal = float(inputs.settings["normal_force_n"])
    try:
        reduction = stage_reduction_compute(stage, inputs)
    except analysis.AnalysisError as exc:
        return StageCurves(
            stage.stage_number,
            math.nan,
            [],
            [],
            [],
            math.nan,
            math.nan,
            math.nan,
            cons_t,
            cons_d,
            taylor,
            t100,
            note,
            error=str(exc),
            casagrande=casagrande,
            casagrande_note=casagrande_note,
        )
    try:  # the failure point the test set asks for (the stored result uses the same rule)
        failure = failure_point(reduction, stage.test.failure_criterion)
    except analysis.AnalysisError:
        failure = reduction.peak
    box_area = reduction.box.plan_area_mm2
    return StageCurves(
        stage_number=stage.stage_number,
        normal_stress_kpa=normal / box_area * 1000.0,
        horizontal_mm=_floats(inputs.horizontal_mm),
        vertical_mm=_floats(inputs.vertical_mm),
        shear_stress_kpa=_floats(reduction.shear_stress_kpa),
        failure_horizontal_mm=failure.horizontal_mm,
        failure_shear_stress_kpa=failure.shear_stress_kpa,
        failure_vertical_mm=failure.vertical_mm,
        consolidation_time_min=cons_t,
        consolidation_settlement_mm=cons_d,
        taylor=taylor,
        t100_min=t100,
        consolidation_note=note,
        casagrande=casagrande,
        casagrande_note=casagrande_note,
    )


def _stage_name(curves: StageCurves) -> str:
    if math.isfinite(curves.normal_stress_kpa):
        return f"Stage {curves.stage_number} · σn {curves.normal_stress_kpa:.0f} kPa"
    return f"Stage {curves.stage_number}"


def shear_stress_figure(curves: Sequence[StageCurves]) -> Figure:
    """τ against x, one trace per stage, with each stage's failure point marked."""
    data: list[dict[str, Any]] = []
    for i, c in enumerate(curves):
        if c.error:
            continue
        colour = PALETTE[i % len(PALETTE)]
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "name": _stage_name(c),
                "x": c.horizontal_mm,
                "y": c.shear_stress_kpa,
                "line": {"color": colour, "width": 2},
                "hovertemplate": "x %{x:.3f} mm<br>τ %{y:.1f} kPa<extra>%{fullData.name}</extra>",
            }
        )
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "name": f"Failure, stage {c.stage_number}",
                "x": [c.failure_horizontal_mm],
                "y": [c.failure_shear_stress_kpa],
                "marker": {
                    "color": colour,
                    "size": 11,
                    "symbol": "diamond-open",
                    "line": {"width": 2},
                },
                "showlegend": False,
                "hovertemplate": "Failure<br>x %{x:.3f} mm<br>τ %{y:.1f} kPa<extra></extra>",
            }
        )
    return {
        "data": data,
        "layout": layout_for("Horizontal displacement x (mm)", "Shear stress τ (kPa)"),
    }


def vertical_figure(curves: Sequence[StageCurves]) -> Figure:
    """y against x, one trace per stage (dilation upward positive)."""
    data = [
        {
            "type": "scatter",
            "mode": "lines",
            "name": _stage_name(c),
            "x": c.horizontal_mm,
            "y": c.vertical_mm,
            "line": {"color": PALETTE[i % len(PALETTE)], "width": 2},
            "hovertemplate": "x %{x:.3f} mm<br>y %{y:.3f} mm<extra>%{fullData.name}</extra>",
        }
        for i, c in enumerate(curves)
        if not c.error
    ]
    return {
        "data": data,
        "layout": layout_for(
            "Horizontal displacement x (mm)", "Vertical displacement y (mm, dilation +)"
        ),
    }


def consolidation_figure(c: StageCurves, colour_index: int = 0) -> Figure:
    """Settlement against √t with Taylor's construction: the early line, the 1.15 line, t90,
    and the derived t50 and t100 levels."""
    colour = PALETTE[colour_index % len(PALETTE)]
    root_t = [math.sqrt(t) for t in c.consolidation_time_min]
    data: list[dict[str, Any]] = [
        {
            "type": "scatter",
            "mode": "markers+lines",
            "name": "Readings",
            "x": root_t,
            "y": c.consolidation_settlement_mm,
            "marker": {"color": colour, "size": 6},
            "line": {"color": colour, "width": 1},
            "hovertemplate": "√t %{x:.2f} √min<br>settlement %{y:.3f} mm<extra></extra>",
        }
    ]
    shapes: list[dict[str, Any]] = []
    if c.taylor is not None and root_t:
        t = c.taylor
        # Draw the construction over the part that matters: up to about twice √t100.
        end = min(root_t[-1], 2.0 * math.sqrt(c.t100_min or t.t90_min * 1.2))
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "name": "Early straight line",
                "x": [0.0, end],
                "y": [t.d0_mm, t.d0_mm + t.slope_mm_per_sqrt_min * end],
                "line": {"color": "#44546a", "dash": "dash", "width": 1.5},
                "hoverinfo": "skip",
            }
        )
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "name": "1.15 × abscissa line",
                "x": [0.0, end],
                "y": [t.d0_mm, t.d0_mm + t.slope_mm_per_sqrt_min / 1.15 * end],
                "line": {"color": "#a33b2b", "dash": "dot", "width": 1.5},
                "hoverinfo": "skip",
            }
        )
        points = [
            ("t50", math.sqrt(t.t50_min), t.d50_mm, t.t50_min),
            ("t90", t.sqrt_t90, t.d90_mm, t.t90_min),
        ]
        if c.t100_min is not None:
            points.append(("t100", math.sqrt(c.t100_min), t.d100_mm, c.t100_min))
        data.append(
            {
                "type": "scatter",
                "mode": "markers+text",
                "name": "Construction points",
                "x": [p[1] for p in points],
                "y": [p[2] for p in points],
                "text": [f"{p[0]} = {p[3]:.2f} min" for p in points],
                "textposition": ["top right", "top right", "bottom left"][: len(points)],
                "marker": {"color": "#1c2733", "size": 9, "symbol": "x"},
                "hovertemplate": "%{text}<br>settlement %{y:.3f} mm<extra></extra>",
            }
        )
    layout = layout_for(
        "Square root of time √t (√min)",
        "Settlement (mm)",
        shapes=shapes,
        height=320,
        showlegend=False,
    )
    settlements = [d for d in c.consolidation_settlement_mm if d is not None]
    if c.taylor is not None and root_t:
        shown = [d for r, d in zip(root_t, settlements, strict=False) if r <= end]
        low = min([*shown, c.taylor.d0_mm])
        high = max([*shown, c.taylor.d100_mm])
        pad = 0.08 * (high - low or 1.0)
        layout["xaxis"]["range"] = [0.0, end]
        layout["yaxis"]["range"] = [high + pad, low - pad]  # settlement downwards
    else:
        layout["yaxis"]["autorange"] = "reversed"
    return {"data": data, "layout": layout}


def log_time_figure(c: StageCurves, colour_index: int = 0) -> Figure:
    """Settlement against log time with Casagrande's construction: the tangent at the steepest
    part of the primary curve, the secondary (creep) line, d0 from the early parabola, and the
    t50 and t100 points."""
    colour = PALETTE[colour_index % len(PALETTE)]
    pairs = [
        (t, d)
        for t, d in zip(c.consolidation_time_min, c.consolidation_settlement_mm, strict=False)
        if t > 0
    ]
    data: list[dict[str, Any]] = [
        {
            "type": "scatter",
            "mode": "markers+lines",
            "name": "Readings",
            "x": [t for t, _ in pairs],
            "y": [d for _, d in pairs],
            "marker": {"color": colour, "size": 6},
            "line": {"color": colour, "width": 1},
            "hovertemplate": "t %{x:.3g} min<br>settlement %{y:.3f} mm<extra></extra>",
        }
    ]
    k = c.casagrande
    if k is not None and pairs:
        t_first, t_last = pairs[0][0], pairs[-1][0]
        for name, (slope, intercept), dash, line_colour in (
            ("Primary tangent", k.primary_tangent, "dash", "#44546a"),
            ("Secondary line", k.secondary_line, "dot", "#a33b2b"),
        ):
            xs = [t_first, t_last]
            data.append(
                {
                    "type": "scatter",
                    "mode": "lines",
                    "name": name,
                    "x": xs,
                    "y": [slope * math.log10(x) + intercept for x in xs],
                    "line": {"color": line_colour, "dash": dash, "width": 1.5},
                    "hoverinfo": "skip",
                }
            )
        data.append(
            {
                "type": "scatter",
                "mode": "markers+text",
                "name": "Construction points",
                "x": [k.t50_min, k.t100_min],
                "y": [k.d50_mm, k.d100_mm],
                "text": [f"t50 = {k.t50_min:.2f} min", f"t100 = {k.t100_min:.2f} min"],
                "textposition": ["top right", "bottom left"],
                "marker": {"color": "#1c2733", "size": 9, "symbol": "x"},
                "hovertemplate": "%{text}<br>settlement %{y:.3f} mm<extra></extra>",
            }
        )
    layout = layout_for("Time t (min, log scale)", "Settlement (mm)", height=320, showlegend=False)
    layout["xaxis"]["type"] = "log"
    settlements = [d for _, d in pairs]
    if k is not None and settlements:
        low, high = min([*settlements, k.d0_mm]), max([*settlements, k.d100_mm])
        pad = 0.08 * (high - low or 1.0)
        layout["yaxis"]["range"] = [high + pad, low - pad]  # settlement downwards
    else:
        layout["yaxis"]["autorange"] = "reversed"
    return {"data": data, "layout": layout}


# --- Envelope ------------------------------------------------------------------------------------


def envelope_band_kpa(
    envelope: EnvelopeResult, normal_stress_kpa: Sequence[float], confidence: float = 0.95
) -> tuple[list[float], list[float]] | None:
    """Two-sided confidence band of the fitted line: c′ + σ·tan φ′ ± t·se(σ), with
    se(σ)² = se_c² + σ²·se_t² + 2σ·ρ·se_c·se_t (the covariance of the two estimates) and Student's t
    on n − 2 degrees of freedom. ``None`` when the fit carries no standard errors."""
    se_c, se_t, rho = (
        envelope.stderr_cohesion_kpa,
        envelope.stderr_tan_phi,
        envelope.corr_cohesion_tan_phi,
    )
    dof = envelope.n - (1 if envelope.through_origin else 2)
    if se_t is None or dof < 1:
        return None
    se_c = se_c or 0.0
    rho = rho or 0.0
    tq = float(stats.t.ppf(0.5 + confidence / 2.0, dof))
    lows, highs = [], []
    for s in normal_stress_kpa:
        line = envelope.cohesion_kpa + envelope.tan_phi * s
        half = tq * math.sqrt(max(se_c**2 + (s * se_t) ** 2 + 2.0 * s * rho * se_c * se_t, 0.0))
        lows.append(line - half)
        highs.append(line + half)
    return lows, highs


def envelope_figure(envelope: EnvelopeResult) -> Figure:
    """Points (included filled, excluded hollow with the reason), the fitted line, its 95 % band
    and the c′, φ′ text."""
    points = [p for p in envelope.points if p.get("normal_stress_kpa") is not None]
    sigma_max = max([p["normal_stress_kpa"] for p in points] + [envelope.normal_stress_max_kpa])
    xs = [sigma_max * 1.1 * k / 40.0 for k in range(41)]
    line = [envelope.cohesion_kpa + envelope.tan_phi * s for s in xs]
    data: list[dict[str, Any]] = []
    band = envelope_band_kpa(envelope, xs)
    if band is not None:
        low, high = band
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "name": "95 % confidence band",
                "x": xs + xs[::-1],
                "y": high + low[::-1],
                "fill": "toself",
                "fillcolor": "rgba(15, 92, 110, 0.14)",
                "line": {"width": 0, "color": "rgba(15, 92, 110, 0)"},
                "hoverinfo": "skip",
            }
        )
    data.append(
        {
            "type": "scatter",
            "mode": "lines",
            "name": "Fitted line",
            "x": xs,
            "y": line,
            "line": {"color": "#0f5c6e", "width": 2.5},
            "hovertemplate": "σn %{x:.0f} kPa<br>τ %{y:.1f} kPa<extra>fitted</extra>",
        }
    )
    included = [p for p in points if p.get("included", True)]
    excluded = [p for p in points if not p.get("included", True)]
    data.append(
        {
            "type": "scatter",
            "mode": "markers",
            "name": "Stages used",
            "x": [p["normal_stress_kpa"] for p in included],
            "y": [p["shear_stress_kpa"] for p in included],
            "text": [f"Stage {p['stage_number']}" for p in included],
            "marker": {"color": "#b86e00", "size": 11, "symbol": "circle"},
            "hovertemplate": "%{text}<br>σn %{x:.1f} kPa<br>τ %{y:.1f} kPa<extra></extra>",
        }
    )
    if excluded:
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "name": "Stages left out",
                "x": [p["normal_stress_kpa"] for p in excluded],
                "y": [p["shear_stress_kpa"] for p in excluded],
                "text": [
                    f"Stage {p['stage_number']} left out: {p.get('reason', '')}" for p in excluded
                ],
                "marker": {
                    "color": "#a33b2b",
                    "size": 11,
                    "symbol": "x-open",
                    "line": {"width": 2},
                },
                "hovertemplate": "%{text}<br>σn %{x:.1f} kPa<br>τ %{y:.1f} kPa<extra></extra>",
            }
        )
    layout = layout_for("Normal stress σn (kPa)", "Shear stress τ (kPa)")
    layout["xaxis"]["rangemode"] = "tozero"
    layout["yaxis"]["rangemode"] = "tozero"
    layout["annotations"] = [
        {
            "xref": "paper",
            "yref": "paper",
            "x": 0.02,
            "y": 0.98,
            "xanchor": "left",
            "yanchor": "top",
            "showarrow": False,
            "align": "left",
            "bgcolor": "rgba(255,255,255,0.85)",
            "bordercolor": "#c9d2dc",
            "text": (
                f"c′ = {envelope.cohesion_kpa:.1f} kPa<br>"
                f"φ′ = {envelope.friction_angle_deg:.1f}°<br>n = {envelope.n}"
            ),
        }
    ]
    return {"data": data, "layout": layout}
