"""One chart description, drawn twice: matplotlib SVG for PDFs, Plotly JSON for pages.

A :class:`Chart` holds series, axes with units and labels. ``to_svg`` draws it with matplotlib's
object API (no pyplot state, so threads may render at once) with ``svg.fonttype='none'`` so text
stays text in the PDF; ``to_plotly`` returns the figure as a JSON-able dict for the pages.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import matplotlib

matplotlib.use("Agg")
from matplotlib import rcParams
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure

rcParams["svg.fonttype"] = "none"
rcParams["svg.hashsalt"] = "tauline"  # stable element ids: the same chart gives the same SVG
rcParams["font.family"] = "DejaVu Sans"

# "outside right": beside the axes, for charts whose curves leave no corner free.
LegendLoc = Literal[
    "lower right", "upper left", "center right", "upper right", "lower left", "outside right"
]
PALETTE = ("#1f5f8b", "#c0392b", "#2e8540", "#8e44ad", "#d35400", "#34495e")


@dataclass(frozen=True)
class Series:
    name: str
    x: Sequence[float | None]
    y: Sequence[float | None]
    mode: str = "lines"  # "lines", "markers" or "lines+markers"
    dash: bool = False
    color_index: int = 0


@dataclass(frozen=True)
class Band:
    """A shaded band between two curves (e.g. the 95 % confidence band of a fitted line)."""

    name: str
    x: Sequence[float]
    low: Sequence[float]
    high: Sequence[float]
    color_index: int = 0


@dataclass(frozen=True)
class Chart:
    title: str
    x_label: str  # with the unit, e.g. "Horizontal displacement x [mm]"
    y_label: str
    series: tuple[Series, ...] = ()
    bands: tuple[Band, ...] = ()
    equal_axes: bool = False
    x_from_zero: bool = True
    y_from_zero: bool = False
    invert_y: bool = False
    x_max: float | None = None
    legend_loc: LegendLoc = "lower right"
    notes: tuple[str, ...] = field(default_factory=tuple)


def _clean(x: Sequence[float | None], y: Sequence[float | None]) -> tuple[list[float], list[float]]:
    pairs = [
        (float(a), float(b))
        for a, b in zip(x, y, strict=False)
        if a is not None and b is not None and math.isfinite(a) and math.isfinite(b)
    ]
    return [p[0] for p in pairs], [p[1] for p in pairs]


MAX_DRAWN_POINTS = 150  # per series in a PDF figure: finer than the printed line can show


def _for_print(x: list[float], y: list[float]) -> tuple[list[float], list[float]]:
    n = len(x)
    if n <= MAX_DRAWN_POINTS:
        return x, y
    step = (n - 1) / (MAX_DRAWN_POINTS - 1)
    index = sorted({round(i * step) for i in range(MAX_DRAWN_POINTS)})
    return [x[i] for i in index], [y[i] for i in index]


def to_svg(chart: Chart, *, width_in: float = 6.3, height_in: float = 3.2) -> str:
    """The chart as an SVG document (text kept as text)."""
    fig = Figure(figsize=(width_in, height_in))
    FigureCanvasSVG(fig)
    ax = fig.add_subplot(1, 1, 1)
    for band in chart.bands:
        ax.fill_between(
            list(band.x),
            list(band.low),
            list(band.high),
            color=PALETTE[band.color_index % len(PALETTE)],
            alpha=0.15,
            linewidth=0,
            label=band.name,
        )
    for s in chart.series:
        x, y = _for_print(*_clean(s.x, s.y))
        color = PALETTE[s.color_index % len(PALETTE)]
        linestyle = "--" if s.dash else "-"
        if s.mode == "markers":
            ax.plot(x, y, linestyle="none", marker="o", markersize=4.5, color=color, label=s.name)
        elif s.mode == "lines+markers":
            ax.plot(
                x,
                y,
                linestyle=linestyle,
                marker="o",
                markersize=3,
                linewidth=1.1,
                color=color,
                label=s.name,
            )
        else:
            ax.plot(x, y, linestyle=linestyle, linewidth=1.1, color=color, label=s.name)
    ax.set_title(chart.title, fontsize=9.5)
    ax.set_xlabel(chart.x_label, fontsize=8.5)
    ax.set_ylabel(chart.y_label, fontsize=8.5)
    ax.tick_params(labelsize=7.5)
    ax.grid(True, linewidth=0.4, color="#cccccc")
    if chart.x_from_zero:
        ax.set_xlim(left=0)
    if chart.x_max is not None:
        ax.set_xlim(right=chart.x_max)
    if chart.y_from_zero:
        ax.set_ylim(bottom=0)
    if chart.equal_axes:
        ax.set_aspect("equal", adjustable="datalim")
    if chart.invert_y:
        ax.invert_yaxis()
    if chart.series or chart.bands:
        # A fixed place: "best" searches every plotted point and dominated the drawing time.
        if chart.legend_loc == "outside right":
            ax.legend(fontsize=6.5, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0))
        else:
            ax.legend(fontsize=7, frameon=False, loc=chart.legend_loc)
    for i, note in enumerate(chart.notes):
        ax.annotate(note, xy=(0.01, 0.02 + 0.06 * i), xycoords="axes fraction", fontsize=7)
    right = 0.66 if chart.legend_loc == "outside right" else 0.98
    fig.subplots_adjust(left=0.1, right=right, top=0.9, bottom=0.15)  # fixed: tight_layout is slow
    out = io.StringIO()
    fig.savefig(out, format="svg", metadata={"Date": None, "Creator": None})
    svg = out.getvalue()
    # Keep only the <svg> element so it can sit inline in HTML.
    return svg[svg.index("<svg") :]


def to_plotly(chart: Chart) -> dict[str, Any]:
    """The same chart as a Plotly figure dict (data + layout) for the interactive pages."""
    data: list[dict[str, Any]] = []
    for band in chart.bands:
        color = PALETTE[band.color_index % len(PALETTE)]
        data.append(
            {
                "type": "scatter",
                "x": list(band.x),
                "y": list(band.low),
                "mode": "lines",
                "line": {"width": 0},
                "showlegend": False,
                "hoverinfo": "skip",
            }
        )
        data.append(
            {
                "type": "scatter",
                "x": list(band.x),
                "y": list(band.high),
                "mode": "lines",
                "line": {"width": 0},
                "fill": "tonexty",
                "fillcolor": color,
                "opacity": 0.15,
                "name": band.name,
            }
        )
    for s in chart.series:
        x, y = _clean(s.x, s.y)
        color = PALETTE[s.color_index % len(PALETTE)]
        data.append(
            {
                "type": "scatter",
                "x": x,
                "y": y,
                "mode": s.mode,
                "name": s.name,
                "line": {"color": color, "dash": "dash" if s.dash else "solid"},
                "marker": {"color": color},
            }
        )
    layout: dict[str, Any] = {
        "title": {"text": chart.title},
        "xaxis": {
            "title": {"text": chart.x_label},
            "rangemode": "tozero" if chart.x_from_zero else "normal",
        },
        "yaxis": {
            "title": {"text": chart.y_label},
            "rangemode": "tozero" if chart.y_from_zero else "normal",
        },
        "margin": {"t": 40, "r": 10},
    }
    if chart.invert_y:
        layout["yaxis"]["autorange"] = "reversed"
    if chart.equal_axes:
        layout["yaxis"]["scaleanchor"] = "x"
    return {"data": data, "layout": layout}


# --- The report's charts, from a revision's frozen content ----------------------------------


def _stage_name(stage: dict[str, Any]) -> str:
    return (
        f"Stage {stage['stage_number']} (σn {stage['normal_stress_kpa']:.0f} kPa)"
        if stage["normal_stress_kpa"] is not None
        else f"Stage {stage['stage_number']}"
    )


def shear_curves_chart(test: dict[str, Any]) -> Chart:
    series = tuple(
        Series(
            _stage_name(s),
            s["curves"]["horizontal_mm"],
            s["curves"]["shear_stress_kpa"],
            color_index=i,
        )
        for i, s in enumerate(test["stages"])
    ) + tuple(
        Series(
            f"Failure, stage {s['stage_number']}",
            [s["failure"]["horizontal_mm"]],
            [s["failure"]["shear_stress_kpa"]],
            mode="markers",
            color_index=i,
        )
        for i, s in enumerate(test["stages"])
    )
    return Chart(
        title=f"{test['reference']}: shear stress against horizontal displacement",
        x_label="Horizontal displacement x [mm]",
        y_label="Shear stress τ [kPa]",
        series=series,
        y_from_zero=True,
        legend_loc="outside right",  # the curves fill every corner between them
    )


def vertical_curves_chart(test: dict[str, Any]) -> Chart:
    series = tuple(
        Series(
            _stage_name(s), s["curves"]["horizontal_mm"], s["curves"]["vertical_mm"], color_index=i
        )
        for i, s in enumerate(test["stages"])
    )
    return Chart(
        title=f"{test['reference']}: vertical against horizontal displacement (dilation +)",
        x_label="Horizontal displacement x [mm]",
        y_label="Vertical displacement y [mm]",
        legend_loc="upper left",
        series=series,
    )


def consolidation_chart(test: dict[str, Any]) -> Chart:
    """Settlement against root time, with each stage's Taylor construction line."""
    series: list[Series] = []
    x_max = 0.0
    for i, s in enumerate(test["stages"]):
        cons = s["consolidation"]
        if not cons["time_min"]:
            continue
        root_t = [math.sqrt(t) if t is not None and t >= 0 else None for t in cons["time_min"]]
        series.append(
            Series(
                _stage_name(s), root_t, cons["settlement_mm"], mode="lines+markers", color_index=i
            )
        )
        taylor = cons.get("taylor")
        if (
            taylor
            and taylor["t90_min"]
            and taylor["d0_mm"] is not None
            and taylor["slope_mm_per_sqrt_min"]
        ):
            # Taylor: the initial straight line d0 + m·√t, and the line with 1.15 times its
            # abscissae, which meets the curve at t90.
            r_end = 1.3 * math.sqrt(taylor["t90_min"])
            d0, m = taylor["d0_mm"], taylor["slope_mm_per_sqrt_min"]
            series.append(
                Series(
                    f"Initial line, stage {s['stage_number']}",
                    [0.0, r_end],
                    [d0, d0 + m * r_end],
                    dash=True,
                    color_index=i,
                )
            )
            series.append(
                Series(
                    f"1.15 line, stage {s['stage_number']} (t90 {taylor['t90_min']:.2f} min)",
                    [0.0, r_end],
                    [d0, d0 + m / 1.15 * r_end],
                    dash=True,
                    color_index=i,
                )
            )
            x_max = max(x_max, 4.0 * math.sqrt(taylor["t90_min"]))
    return Chart(
        title=f"{test['reference']}: consolidation (root-time construction)",
        x_label="√(time) [√min]",
        y_label="Settlement [mm]",
        series=tuple(series),
        invert_y=True,
        x_max=x_max or None,
        legend_loc="outside right",
    )


def envelope_chart(test: dict[str, Any]) -> Chart:
    """τ–σn points, each fitted line over its stress range, and the 95 % band of the line."""
    from scipy import stats  # only here: the band's t quantile

    series: list[Series] = []
    bands: list[Band] = []
    for i, env in enumerate(test["envelopes"]):
        pts = [p for p in env["points"] if p.get("normal_stress_kpa") is not None]
        inc = [p for p in pts if p.get("included", True)]
        exc = [p for p in pts if not p.get("included", True)]
        series.append(
            Series(
                f"{env['label']} points",
                [p["normal_stress_kpa"] for p in inc],
                [p["shear_stress_kpa"] for p in inc],
                mode="markers",
                color_index=i,
            )
        )
        if exc:
            series.append(
                Series(
                    f"{env['label']} excluded",
                    [p["normal_stress_kpa"] for p in exc],
                    [p["shear_stress_kpa"] for p in exc],
                    mode="markers",
                    color_index=5,
                )
            )
        hi = max(
            (p["normal_stress_kpa"] for p in pts),
            default=env["normal_stress_range_kpa"][1] or 100.0,
        )
        xs = [hi * 1.1 * k / 40 for k in range(41)]
        c, t = env["cohesion_kpa"] or 0.0, env["tan_phi"] or 0.0
        series.append(
            Series(
                f"{env['label']}: c′ {c:.1f} kPa, φ′ {env['friction_angle_deg']:.1f}°",
                xs,
                [c + t * x for x in xs],
                color_index=i,
            )
        )
        se_c, se_t, rho, n = (
            env["stderr_cohesion_kpa"],
            env["stderr_tan_phi"],
            env["corr_cohesion_tan_phi"],
            env["n"],
        )
        if se_c is not None and se_t is not None and rho is not None and n and n > 2:
            q = float(stats.t.ppf(0.975, n - 2))
            half = [
                q * math.sqrt(max(se_c**2 + (x * se_t) ** 2 + 2 * x * rho * se_c * se_t, 0.0))
                for x in xs
            ]
            bands.append(
                Band(
                    f"{env['label']}: 95 % band of the line",
                    xs,
                    [c + t * x - h for x, h in zip(xs, half, strict=True)],
                    [c + t * x + h for x, h in zip(xs, half, strict=True)],
                    color_index=i,
                )
            )
    return Chart(
        title=f"{test['reference']}: shear strength envelope",
        x_label="Normal stress σn [kPa]",
        legend_loc="upper left",
        y_label="Shear stress τ [kPa]",
        series=tuple(series),
        bands=tuple(bands),
        y_from_zero=True,
    )


def report_charts(test: dict[str, Any]) -> dict[str, Chart]:
    return {
        "shear": shear_curves_chart(test),
        "vertical": vertical_curves_chart(test),
        "consolidation": consolidation_chart(test),
        "envelope": envelope_chart(test),
    }
