"""The pictures reliability engineers read, from plain arrays (dashboard.life_curves): hazard rate
h(t) with its band, cumulative hazard H(t), and the probability plot on Weibull scales.

The Weibull plot puts ln t on the x axis (a log axis of ages) and ln(-ln(1 - F)) on the y axis,
labelled with F in percent (NIST/SEMATECH e-Handbook 8.2.2.1): a Weibull model is a straight
line of slope beta, a mixture shows its bends. Shared by the live page and the report.
"""
from __future__ import annotations

import holoviews as hv
import numpy as np

from .axis_style import count_formatter
from .weibull_scale import WEIBULL_TICKS, weibull_y
from .plots import DRAWS, GRID, MODEL, common_opts, finish_overlay
from .time_units import age_label, unit_singular

FIELD = "#222222"
#: Half-width pictures keep their legend above the plotting area, in one row, so the data keeps the width.
HALF_WIDTH_LEGEND = {"legend_position": "top", "legend_cols": 3}


def _positive(a, log):
    a = np.asarray(a, dtype=float)
    return np.where(a > 0, a, np.nan) if log else a


def log_ticks(lo: float, hi: float) -> list[float]:
    """Tick values 1, 2, 5 x 10^k between lo and hi (only 10^k when that would be more than 10), so a
    log axis spanning less than a decade does not crowd its labels."""
    if not (lo > 0 and hi > lo):
        return []
    decades = range(int(np.floor(np.log10(lo))), int(np.ceil(np.log10(hi))) + 1)
    ticks = [m * 10.0 ** k for k in decades for m in (1, 2, 5) if lo <= m * 10.0 ** k <= hi]
    if len(ticks) > 10:
        ticks = [t for t in ticks if np.isclose(np.log10(t), round(np.log10(t)))]
    return ticks


def _log_limits(*arrays) -> dict:
    """Explicit ranges for log-log axes: from the smallest to the largest positive value shown."""
    out = {}
    for axis, group in (("xlim", arrays[0::2]), ("ylim", arrays[1::2])):
        values = np.concatenate([np.asarray(a, dtype=float).ravel() for a in group]) if group else np.empty(0)
        values = values[np.isfinite(values) & (values > 0)]
        if values.size:
            out[axis] = (float(values.min()) / 1.5, float(values.max()) * 1.5)
            out[axis[0] + "ticks"] = log_ticks(*out[axis])
    return out


def hazard_plot(data: dict, width=None, height=300) -> hv.Overlay:
    """The model's h(t) and the binned estimate from the draws with its band (log-log on request)."""
    log = bool(data.get("log"))
    unit = data.get("unit", "")
    per = unit_singular(unit)
    xd = hv.Dimension("age_h", label=age_label(unit).replace("age at failure", "age"))
    hd = hv.Dimension("hazard", label=f"hazard rate h(t) (per {per})" if per else "hazard rate h(t)")
    layers = []
    mid = np.asarray(data["mid"], dtype=float)
    if mid.size:
        band = hv.Area((mid, _positive(data["lower"], log), _positive(data["upper"], log)), xd,
                       [hd, hv.Dimension("upper")], label=f"{data['band']:.0%} band").opts(
            color=DRAWS, alpha=0.25, line_alpha=0)
        est = hv.Scatter((mid, _positive(data["estimate"], log)), xd, hd, label="from the draws (per bin)").opts(
            color=DRAWS, size=4, tools=["hover"])
        layers += [band, est]
    label = "model, per bin (field data)" if data.get("model_per_bin") else "model h(t)"
    layers.append(hv.Curve((data["model_x"], _positive(data["model_h"], log)), xd, hd, label=label).opts(
        color=MODEL, line_width=2))
    n = int(data.get("n", 0))
    title = f"hazard rate h(t), model and {n:,} draws" if n else "hazard rate h(t) of the model (no draws yet)"
    if log:
        # The band's lower edge may reach 0 in a bin without failures: it does not set the range.
        extra = {"logx": True, "logy": True, **_log_limits(data["model_x"], data["model_h"], mid, data["estimate"])}
    else:
        # The last bins' estimates are noisy: the model and the bulk of the estimates set the height.
        model_h = np.asarray(data["model_h"], dtype=float)
        tops = [np.nanmax(model_h[np.isfinite(model_h)]) if np.isfinite(model_h).any() else 0.0]
        if mid.size:
            tops.append(float(np.nanpercentile(data["estimate"], 95)))
        top = 1.3 * max(tops)
        extra = {"yformatter": "%.3g", "xformatter": count_formatter(), **({"ylim": (0, top)} if top > 0 else {})}
    extra.update(HALF_WIDTH_LEGEND)
    return finish_overlay(hv.Overlay(layers), **common_opts(title, width, height, **extra))


def cumulative_hazard_plot(data: dict, width=None, height=300) -> hv.Overlay:
    """H(t) = -ln R(t) of the model against -ln(share of draws still running) with its band."""
    log = bool(data.get("log"))
    unit = data.get("unit", "")
    xd = hv.Dimension("age_H", label=age_label(unit).replace("age at failure", "age"))
    Hd = hv.Dimension("H", label="cumulative hazard H(t)")
    layers = []
    edges = np.asarray(data["edges"], dtype=float)
    if edges.size and int(data.get("n", 0)):
        layers.append(hv.Area((edges, _positive(data["H_lower"], log), _positive(data["H_upper"], log)), xd,
                              [Hd, hv.Dimension("H_upper")], label=f"{data['band']:.0%} band").opts(
            color=DRAWS, alpha=0.25, line_alpha=0))
        layers.append(hv.Curve((edges, _positive(data["H"], log)), xd, Hd, label="from the draws").opts(
            color=DRAWS, line_width=2, interpolation="steps-post"))
    layers.append(hv.Curve((data["x"], _positive(data["model_H"], log)), xd, Hd, label="model H(t)").opts(
        color=MODEL, line_width=2, line_dash="dashed"))
    if log:
        extra = {"logx": True, "logy": True, **_log_limits(data["x"], data["model_H"], edges, data["H"])}
    else:
        extra = {"yformatter": "%.3g", "xformatter": count_formatter()}
    extra.update(HALF_WIDTH_LEGEND)
    return finish_overlay(hv.Overlay(layers), **common_opts("cumulative hazard H(t) = −ln R(t)", width, height,
                                                            **extra))


def weibull_plot(data: dict, width=None, height=320) -> hv.Overlay:
    """Probability plot on Weibull scales: model line, draws' quantiles, field data's own points."""
    unit = data.get("unit", "")
    xd = hv.Dimension("age_w", label=f"age ({unit}), log scale" if unit else "age, log scale")
    yd = hv.Dimension("weibull_y", label="share failed F (Weibull scale: ln(−ln(1 − F)))")
    y = np.asarray(data["y"], dtype=float)
    model_t = _positive(data["model_t"], True)
    layers = [hv.Curve((model_t, y), xd, yd, label="model").opts(color=MODEL, line_width=2)]
    sample_t = _positive(data["sample_t"], True)
    if np.isfinite(sample_t).any():
        layers.append(hv.Scatter((sample_t, y), xd, yd, label="draws (quantiles)").opts(
            color=DRAWS, size=4, tools=["hover"]))
    field = data.get("field")
    if field is not None and np.size(field["t"]):
        layers.append(hv.Scatter((field["t"], weibull_y(field["F"])), xd, yd, label="field data").opts(
            color=FIELD, marker="triangle", size=7, tools=["hover"]))
    ticks = [(float(weibull_y(p)), f"{100 * p:g} %") for p in WEIBULL_TICKS]
    finite = np.concatenate([v[np.isfinite(v)] for v in (model_t, sample_t)] +
                            ([np.asarray(field["t"], dtype=float)] if field is not None else []))
    xlim = (float(finite.min()) / 1.5, float(finite.max()) * 1.5) if finite.size else (None, None)
    n = int(data.get("n", 0))
    title = "probability plot on Weibull scales (a Weibull is a straight line of slope β)"
    if n:
        title += f", {n:,} draws"
    opts = common_opts(title, width, height, logx=True, yticks=ticks, ylim=(float(y[0]) - 0.3, float(y[-1]) + 0.3),
                       xlim=xlim, **({"xticks": log_ticks(*xlim)} if xlim[0] else {}))
    # A reference line at F = 63.2 %, where a Weibull's age is its scale eta.
    layers.append(hv.HLine(0.0).opts(color=GRID, line_dash="dotted", line_width=1))
    return finish_overlay(hv.Overlay(layers), **opts)

