"""Pictures and tables of the fleet step, from plain arrays (HoloViews elements, Bokeh backend, and
HTML strings), shared by the live page and the standalone report.

Monte Carlo figures are drawn as bands or bars with the exact reference on top (the renewal-equation
expectation, the age-replacement cost rate of Barlow & Proschan 1965, the warranty expectation).
"""
from __future__ import annotations


import holoviews as hv
import numpy as np

from .axis_style import hide_logo
from .plots import DRAWS, FONTS, GRID, MODEL, TOOLS
from .time_units import unit_singular

BAND = "#a9c4de"


def _opts(title, width, height, **extra):
    size = {"width": int(width), "height": int(height)} if width else \
        {"responsive": True, "height": int(height), "min_width": 260}
    # Legends above the plotting area (never over the data); toolbars without the library's logo.
    extra["legend_position"] = "top"
    extra.setdefault("legend_cols", 3)
    return dict(title=title, show_grid=True, fontsize=FONTS, default_tools=TOOLS, toolbar="right",
                framewise=True, hooks=[hide_logo], **size, **extra)


def _framewise(overlay):
    return overlay.map(lambda e: e.opts(framewise=True), hv.Element)


def failures_plot(data: dict, unit: str, width=None, height=300) -> hv.Overlay:
    """Failures per period: the runs' central 90% band and mean as steps, the exact expectation on top."""
    edges = np.asarray(data["edges"], dtype=float)
    x = np.repeat(edges, 2)[1:-1]

    def steps(v):
        return np.repeat(np.asarray(v, dtype=float), 2)

    band = hv.Area((x, steps(data["band_low"]), steps(data["band_high"])), "time", ["low", "high"],
                   label="90% of the runs").opts(color=BAND, alpha=0.6, line_alpha=0)
    mean = hv.Curve((x, steps(data["mean"])), "time", "failures", label="simulated mean").opts(color=DRAWS,
                                                                                                line_width=2)
    layers = [band, mean]
    if data.get("exact") is not None:
        layers.append(hv.Curve((x, steps(data["exact"])), "time", "failures", label="exact expectation")
                      .opts(color=MODEL, line_width=2, line_dash="dashed"))
    return _framewise(hv.Overlay(layers)).opts(
        **_opts("Failures per period (whole fleet)", width, height, legend_position="top_left",
                xlabel=f"time ({unit})", ylabel="failures in the period"))


def spares_plot(data: dict, width=None, height=300) -> hv.Overlay:
    """Spares that cover the horizon's demand against the service level, with their intervals."""
    levels = np.asarray(data["levels"], dtype=float) * 100
    stock = np.asarray(data["stock"], dtype=float)
    low = np.asarray(data["low"], dtype=float)
    high = np.asarray(data["high"], dtype=float)
    curve = hv.Curve((levels, stock), "service level (%)", "spares", label="stock").opts(
        color=DRAWS, line_width=2)
    points = hv.Scatter((levels, stock), "service level (%)", "spares").opts(color=DRAWS, size=7)
    ok = np.isfinite(low) & np.isfinite(high)
    bars = hv.ErrorBars((levels[ok], stock[ok], stock[ok] - low[ok], high[ok] - stock[ok]),
                        "service level (%)", ["spares", "below", "above"], label="95% interval").opts(
        color=GRID, line_width=1.5)
    return _framewise(hv.Overlay([bars, curve, points])).opts(
        **_opts("Spares for the horizon against service level", width, height, legend_position="top_left",
                xlabel="service level: chance the stock covers the demand (%)", ylabel="spares (replacements)"))


def cost_rate_plot(data: dict, unit: str, width=None, height=300) -> hv.Overlay:
    """C(T) with the run-to-failure cost rate and the optimum (Barlow & Proschan 1965)."""
    ages = np.asarray(data["ages"], dtype=float)
    rates = np.asarray(data["cost_rates"], dtype=float)
    rtf = float(data["cost_rate_run_to_failure"])
    keep = rates <= 4 * rtf        # the curve's steep start at small ages would flatten the rest
    curve = hv.Curve((ages[keep], rates[keep]), f"replacement age ({unit})", "cost rate",
                     label="replace at age T or at failure").opts(color=DRAWS, line_width=2)
    line = hv.Curve(([ages[0], ages[-1]], [rtf, rtf]), f"replacement age ({unit})", "cost rate",
                    label="run to failure").opts(color=MODEL, line_dash="dashed", line_width=2)
    layers = [curve, line]
    if data.get("optimal_age") is not None:
        layers.append(hv.Scatter(([data["optimal_age"]], [data["cost_rate"]]), f"replacement age ({unit})",
                                 "cost rate", label="optimum").opts(color="#2e7d4f", size=10, marker="diamond"))
    return _framewise(hv.Overlay(layers)).opts(
        **_opts("Cost per unit time against replacement age", width, height, legend_position="top_right",
                xlabel=f"preventive replacement age T ({unit})",
                ylabel=f"cost per {unit_singular(unit) or 'time unit'} and unit"))


def warranty_plot(data: dict, unit: str, width=None, height=300) -> hv.Overlay:
    """Claims per calendar period: simulated means with their 95% intervals, the exact expectation on top."""
    edges = np.asarray(data["edges"], dtype=float)
    mid = (edges[:-1] + edges[1:]) / 2
    mean = np.asarray(data["mean"], dtype=float)
    interval = hv.ErrorBars((mid, mean, mean - np.asarray(data["mean_low"]), np.asarray(data["mean_high"]) - mean),
                            "calendar period", ["claims", "below", "above"], label="95% interval of the mean").opts(
        color=DRAWS)
    curve = hv.Curve((mid, mean), "calendar period", "claims", label="simulated mean").opts(color=DRAWS, line_width=2)
    exact = hv.Scatter((mid, np.asarray(data["expected"], dtype=float)), "calendar period", "claims",
                       label="exact expectation").opts(color=MODEL, size=9, marker="x")
    return _framewise(hv.Overlay([curve, interval, exact])).opts(
        **_opts("Warranty claims per calendar period", width, height, legend_position="top_right",
                xlabel=f"calendar time, period mid-points ({unit})", ylabel="free-replacement claims"))
