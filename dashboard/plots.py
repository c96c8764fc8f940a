"""Pictures and tables of the drawing board, built from plain arrays: HoloViews elements (Bokeh
backend) and small HTML tables, shared by the live page and the standalone report.

Every function takes numbers and returns an element or an HTML string; none
touches the engine's objects, so the report and the live views draw the same
pictures from the same data.
"""
from __future__ import annotations

import math

import holoviews as hv
import numpy as np

from .axis_style import count_formatter, hide_logo, log_formatter
from .time_units import age_label, unit_singular


if "bokeh" not in hv.Store.renderers:
    hv.extension("bokeh", logo=False)

#: Where HoloViews keeps an element's columns. Every picture here is built from plain numpy arrays, which
#: the dictionary and grid stores hold as they are; HoloViews' first choice, a pandas data frame, would copy
#: every column into one and import pandas for it (about 0.25 s of a `lifedraw report`). The Bokeh models
#: drawn are the same (tests/test_report.py compares them).
PLAIN_DATATYPES = ["dictionary", "grid", "array"]
hv.Dataset.datatype = PLAIN_DATATYPES

DRAWS = "#5b8db8"
MODEL = "#c2412d"
HAT = "#d98e04"
SQUEEZE = "#2e7d4f"
REJECTED = "#c2412d"
ACCEPTED = "#5b8db8"
GRID = "#8c8c8c"
LABEL_COLOURS = {"squeeze": SQUEEZE, "accepted": ACCEPTED, "rejected": REJECTED}
LABEL_NAMES = {"squeeze": "decided by the squeeze", "accepted": "accepted (density evaluated)",
               "rejected": "rejected"}
FONTS = {"title": "11pt", "labels": "10pt", "xticks": "9pt", "yticks": "9pt", "legend": "9pt"}
TOOLS = ["pan", "wheel_zoom", "box_zoom", "reset", "save"]


def _size(width, height):
    """Fixed size for the report, stretch to the step's width on the page."""
    if width:
        return {"width": int(width), "height": int(height)}
    return {"responsive": True, "height": int(height), "min_width": 260}


def _common(title, width, height, **extra):
    # framewise: ranges follow each new frame of a live plot (a refit can move them anywhere).
    # Log axes share one notation (axis_style); legends are placed by _finish.
    if extra.get("logy"):
        extra.setdefault("yformatter", log_formatter())
    if extra.get("logx"):
        extra.setdefault("xformatter", log_formatter())
    return dict(title=title, show_grid=True, fontsize=FONTS, default_tools=TOOLS, toolbar="right",
                framewise=True, hooks=[hide_logo], **_size(width, height), **extra)


def common_opts(title, width, height, **extra) -> dict:
    """The options every picture shares (size, fonts, tools without a logo, outside legend)."""
    return _common(title, width, height, **extra)


def _finish(obj, **opts):
    """Apply the plot options; in an overlay every layer is also marked framewise, since
    HoloViews recomputes a live overlay's ranges only for layers that ask for it."""
    if isinstance(obj, hv.Overlay):
        obj = obj.map(lambda e: e.opts(framewise=True), hv.Element)
        # Outside the plotting area, so a legend never covers data.
        opts.setdefault("legend_position", "right")
    return obj.opts(**opts)


def finish_overlay(obj, **opts):
    """``_finish`` for the other picture modules: options, with every layer of an overlay framewise."""
    return _finish(obj, **opts)


def _steps(edges, values):
    """x, y of a step outline over bins (for a per-bin expectation)."""
    x = np.repeat(edges, 2)[1:-1]
    y = np.repeat(values, 2)
    return x, y


# ---- the live check ------------------------------------------------------------------------

def density_histogram(data: dict, width=None, height=320) -> hv.Overlay:
    """Histogram of the draws as a density, against the model's density (or, for a model
    with atoms, its expected share per bin from cdf differences, as a step outline)."""
    edges = np.asarray(data["edges"], dtype=float)
    widths = np.diff(edges)
    n = int(data["n"])
    unit = data.get("unit", "")
    per = unit_singular(unit)
    density = np.asarray(data["counts"], dtype=float) / (max(n, 1) * widths)
    expected = np.asarray(data["expected"], dtype=float) / widths
    log = bool(data.get("log"))
    age = hv.Dimension("age", label=age_label(unit))
    dens = hv.Dimension("density", label=f"density (1/{per})" if per else "density")
    if log:
        # Bars from 0 cannot be drawn on a log axis: the draws become a step outline.
        density = np.where(density > 0, density, np.nan)
        sx, sy = _steps(edges, density)
        bars = hv.Curve((sx, sy), age, dens, label="draws").opts(color=DRAWS, line_width=2)
    else:
        bars = hv.Histogram((edges, density), kdims=[age], vdims=[dens], label="draws").opts(
            fill_color=DRAWS, fill_alpha=0.55, line_color=DRAWS, line_alpha=0.8, line_width=0.5)
    if data.get("model_x") is not None:
        y = np.asarray(data["model_pdf"], dtype=float)
        model = hv.Curve((data["model_x"], np.where(y > 0, y, np.nan) if log else y), age, dens,
                         label="model density").opts(color=MODEL, line_width=2)
        reference = y
    else:
        sx, sy = _steps(edges, expected)
        model = hv.Curve((sx, np.where(sy > 0, sy, np.nan) if log else sy), age, dens,
                         label="model: expected share per bin").opts(color=MODEL, line_width=2)
        reference = expected
    right = edges[-1] if log else float(data.get("view_right") or edges[-1])
    hidden = int(data.get("above", 0)) + int(data.get("below", 0))
    title = f"{n:,} draws against the model" if n else "no draws yet: press Start"
    if n and hidden:
        title += f" ({hidden:,} beyond the binned range)"
    opts = _common(title, width, height, xlim=(float(edges[0]), float(right)), tools=["hover"],
                   **({"logy": True} if log else {"yformatter": "%.3g"}))
    if log:
        positive = np.concatenate([reference[np.isfinite(reference) & (reference > 0)],
                                   density[np.isfinite(density) & (density > 0)]])
        top = float(positive.max()) if positive.size else 1.0
        bottom = float(positive.min()) if positive.size else top * 1e-6
        opts.update(ylim=(max(bottom / 2, top * 1e-9), top * 2))
    return _finish(bars * model, **opts)


def qq_plot(data: dict, width=None, height=280) -> hv.Overlay:
    unit = data.get("unit", "")
    model = np.asarray(data["model"], dtype=float)
    sample = np.asarray(data["sample"], dtype=float)
    mx = hv.Dimension("model", label=f"model quantile ({unit})")
    sy = hv.Dimension("sample", label=f"sample quantile ({unit})")
    finite = np.concatenate([model[np.isfinite(model)], sample[np.isfinite(sample)]])
    lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    line = hv.Curve(([lo, hi], [lo, hi]), mx, sy, label="y = x").opts(color=GRID, line_dash="dashed")
    pts = hv.Scatter((model, sample), mx, sy, label="quantiles").opts(color=DRAWS, size=4, tools=["hover"])
    n = int(data.get("n", 0))
    # Short enough to show whole in the report's half-width plots; the axes say what is plotted.
    return _finish(line * pts, **_common(f"QQ plot, {n:,} draws (dashed: y = x)", width, height,
                                         show_legend=False))


def pp_plot(data: dict, width=None, height=280) -> hv.Overlay:
    mx = hv.Dimension("model_p", label="model F(x) at the sample quantile")
    ey = hv.Dimension("empirical", label="share of draws at or below x")
    line = hv.Curve(([0, 1], [0, 1]), mx, ey, label="y = x").opts(color=GRID, line_dash="dashed")
    pts = hv.Scatter((data["model"], data["empirical"]), mx, ey, label="probabilities").opts(
        color=DRAWS, size=4, tools=["hover"])
    return _finish(line * pts, **_common("PP plot (dashed: y = x)", width,
                                         height, show_legend=False, xlim=(0, 1), ylim=(0, 1)))


def trace_plot(data: dict, key: str, width=None, height=240) -> hv.Overlay:
    """Running trace against the number of draws: the KS p-value or the acceptance rate."""
    n = np.asarray(data["n"], dtype=float)
    y = np.asarray(data[key], dtype=float)
    nd = hv.Dimension("n", label="draws so far")
    if key == "ks_p":
        yd = hv.Dimension("p", label="KS p-value")
        title = "Kolmogorov-Smirnov p-value as draws accumulate"
        ref = hv.HLine(1e-3).opts(color=MODEL, line_dash="dotted", line_width=1)
        ylim = (0, 1.02)
    else:
        yd = hv.Dimension("rate", label="acceptance rate")
        ref = hv.HLine(1.0).opts(color=GRID, line_dash="dotted", line_width=1)
        finite = y[np.isfinite(y)]
        if n.size and not finite.size:
            title = "acceptance rate: no rejection step (every candidate is a draw)"
        else:
            title = "acceptance rate of candidates as draws accumulate"
        ylim = (max(0.0, float(finite.min()) - 0.05) if finite.size else 0.0, 1.02)
    curve = hv.Curve((n, y), nd, yd).opts(color=DRAWS, line_width=2, tools=["hover"])
    dots = hv.Scatter((n, y), nd, yd).opts(color=DRAWS, size=4)
    # Linear from 0 so the first batches sit at the left; the axis type cannot change
    # while the plot lives, so no switch to log as draws pile up.
    # Before the first batch (after a reset) the axis spans the first thousand draws, not 0 to 1.
    right = max(float(n.max()) * 1.05 if n.size else 0.0, 1000.0)
    opts = _common(title, width, height, ylim=ylim, xlim=(0.0, right), xformatter=count_formatter())
    return _finish(curve * dots * ref, **opts)


# ---- method geometry ------------------------------------------------------------------------

def geometry_plots(geom: dict, unit: str = "", fallback: dict | None = None, width=None,
                   height=300, view: tuple[float, float] | None = None) -> list:
    """Pictures of how the method works, chosen by the keys its ``geometry()`` returned.

    ``fallback`` (``{"x", "pdf", "draws"}``) draws the density and a histogram of
    draws when the method's picture is not one this module knows; ``view`` is the
    range of ages the linear pictures show (the live histogram's), if given.
    """
    if "candidates" in geom and "hat" in geom:
        return _rejection_plots(geom, unit, width, height, view)
    if "boundary_u" in geom and "candidates_u" in geom:
        return [_ratio_of_uniforms_plot(geom, width, height)]
    if "u_error" in geom and "u" in geom:
        return _inversion_plots(geom, unit, width, height)
    if "probability" in geom and "left" in geom:
        return _table_plots(geom, unit, width, height)
    if "parts" in geom and "weights" in geom:
        return _composition_plots(geom, unit, width, height)
    return [_fallback_plot(fallback, geom.get("method", "this method"), unit, width, height)]


def _inversion_plots(g, unit, width, height):
    u = np.asarray(g["u"], dtype=float)
    x = np.asarray(g["x"], dtype=float)
    ud = hv.Dimension("u", label="u (uniform draw)")
    xd = hv.Dimension("x", label=age_label(unit))
    pieces = g.get("piece_starts")
    how = f"{len(pieces):,} polynomial pieces" if pieces is not None else "closed form"
    inv = hv.Curve((u, x), ud, xd).opts(color=MODEL, line_width=2, tools=["hover"]).opts(
        **_common(f"inverse CDF x = F⁻¹(u) ({how})", width, height))
    err = np.maximum(np.asarray(g["u_error"], dtype=float), 1e-17)
    ed = hv.Dimension("err", label="u-error |u − F(F⁻¹(u))|")
    tol = float(g.get("tolerance", 1e-10))
    curve = hv.Curve((u, err), ud, ed, label="u-error").opts(color=DRAWS, line_width=1.5, tools=["hover"])
    line = hv.HLine(tol, label="tolerance").opts(color=MODEL, line_dash="dashed", line_width=1.5)
    top = max(float(err.max()), tol) * 10
    uerr = _finish(curve * line, **_common(f"u-error against the tolerance {tol:g} (floor 1e-17)", width,
                                           height, logy=True, ylim=(1e-17, top)))
    return [inv, uerr]


def _table_plots(g, unit, width, height):
    left = np.asarray(g["left"], dtype=float)
    w = np.asarray(g["width"], dtype=float)
    p = np.asarray(g["probability"], dtype=float)
    xd = hv.Dimension("x", label=age_label(unit))
    pd_ = hv.Dimension("p", label="probability")
    tail = bool(g.get("tail"))
    if g.get("kind") == "bins":
        edges = np.concatenate([left, [left[-1] + w[-1]]])
        first = hv.Histogram((edges, p), kdims=[xd], vdims=[pd_]).opts(
            fill_color=DRAWS, fill_alpha=0.6, line_color="white", tools=["hover"]).opts(
            **_common(f"bin probabilities ({p.size} bins, uniform within each)", width, height))
    else:
        atoms = left[:-1] if tail else left
        pa = p[:-1] if tail else p
        first = hv.Spikes((atoms, pa), kdims=[xd], vdims=[pd_]).opts(
            color=DRAWS, line_width=3, tools=["hover"])
        title = f"failure-time probabilities ({atoms.size} atoms"
        title += f", {p[-1]:.1%} in the fitted tail)" if tail else ")"
        first = first.opts(**_common(title, width, height))
    keep = np.asarray(g.get("keep", np.ones_like(p)), dtype=float)
    cols = [str(i + 1) for i in range(keep.size)]
    stacked = hv.Bars([(c, "own bin", k) for c, k in zip(cols, keep)]
                      + [(c, "alias", 1 - k) for c, k in zip(cols, keep)],
                      kdims=[hv.Dimension("column", label="alias-table column"), "part"],
                      vdims=[hv.Dimension("share", label="share of the column")]).opts(
        stacked=True, cmap=[DRAWS, HAT], tools=["hover"], legend_position="right",
        **_common("alias table: each column keeps its own bin or passes to its alias", width, height))
    return [first, stacked]


def _composition_plots(g, unit, width, height):
    weights = np.asarray(g["weights"], dtype=float)
    methods = list(g.get("part_methods", ["?"] * weights.size))
    names = [f"{i + 1}: {m}" for i, m in enumerate(methods)]
    bars = hv.Bars(list(zip(names, weights)), hv.Dimension("component", label="component: its method"),
                   hv.Dimension("w", label="weight (share of units)")).opts(
        color=DRAWS, tools=["hover"], **_common("which sub-population: alias choice by weight", width, height))
    out = [bars]
    curves = []
    for i, part in enumerate(g.get("parts", [])):
        if "u_error" in part and "u" in part:
            err = np.maximum(np.asarray(part["u_error"], dtype=float), 1e-17)
            curves.append(hv.Curve((part["u"], err), hv.Dimension("u", label="u (uniform draw)"),
                                   hv.Dimension("err", label="u-error"), label=f"component {i + 1}"))
    if curves:
        tol = float(g["parts"][0].get("tolerance", 1e-10))
        out.append(_finish(hv.Overlay(curves + [hv.HLine(tol).opts(color=MODEL, line_dash="dashed")]),
            **_common("each component's inversion: u-error", width, height, logy=True,
                      ylim=(1e-17, 1e-6 if tol < 1e-7 else tol * 100))))
    return out


def _candidates_overlay(xs, ys, labels, xd, yd):
    layers = []
    labels = np.asarray(labels).astype(str)
    for key in ("squeeze", "accepted", "rejected"):
        m = labels == key
        if m.any():
            layers.append(hv.Scatter((np.asarray(xs)[m], np.asarray(ys)[m]), xd, yd,
                                     label=LABEL_NAMES[key]).opts(color=LABEL_COLOURS[key], size=4, alpha=0.75))
    return layers


def _rejection_plots(g, unit, width, height, view=None):
    x = np.asarray(g["x"], dtype=float)
    xd = hv.Dimension("x", label=age_label(unit))
    yd = hv.Dimension("y", label="density")
    cand = g["candidates"]
    acc = g.get("expected_acceptance")
    sub = f" (acceptance {acc:.1%})" if acc is not None else ""

    def layer(log):
        def v(a):
            a = np.asarray(a, dtype=float)
            return np.where(a > 0, a, np.nan) if log else a
        parts = [hv.Curve((x, v(g["hat"])), xd, yd, label="hat").opts(color=HAT, line_width=2),
                 hv.Curve((x, v(g["f"])), xd, yd, label="density f").opts(color="#222222", line_width=1.5),
                 hv.Curve((x, v(g["squeeze"])), xd, yd, label="squeeze").opts(color=SQUEEZE, line_width=1.5,
                                                                                 line_dash="dashed")]
        if not log:
            parts += _candidates_overlay(cand["x"], cand["y"], cand["label"], xd, yd)
        pts = np.asarray(g.get("points", []), dtype=float)
        if pts.size:
            parts.append(hv.Scatter((pts, v(g["points_f"])), xd, yd, label="construction points").opts(
                color="#222222", marker="triangle", size=7))
        return hv.Overlay(parts)

    hat = np.asarray(g["hat"], dtype=float)
    ok = np.isfinite(hat)
    lo, hi = view if view else (float(x[ok].min()), float(x[ok].max())) if ok.any() else (0.0, 1.0)
    # A pole at the lower end would squash the picture: the axis stops at the 99th percentile
    # of the hat over ages spread evenly across the view, which leaves out a narrow spike.
    even = np.interp(np.linspace(lo, hi, 2000), x[ok], hat[ok]) if ok.sum() > 1 else hat[ok]
    top = 1.15 * float(np.percentile(even, 99)) if even.size else None
    limits = {"ylim": (0, top)} if top else {}
    if view:
        limits["xlim"] = (float(view[0]), float(view[1]))
    lin = _finish(layer(False), **_common("hat, squeeze and candidates" + sub, width, height + 40,
                                          yformatter="%.3g", **limits))
    f = np.asarray(g["f"], dtype=float)
    pos = f[f > 0]
    ylim = (float(pos.min()) / 2, float(np.nanmax(np.asarray(g["hat"], dtype=float))) * 2) if pos.size else None
    log = _finish(layer(True), **_common("the same on a log scale: the hat is piecewise exponential", width,
                                     height, logy=True, show_legend=False,
                                     **({"ylim": ylim} if ylim else {})))
    return [lin, log]


def _ratio_of_uniforms_plot(g, width, height):
    ud = hv.Dimension("u", label="u")
    vd = hv.Dimension("v", label="v")
    parts = [hv.Curve((g["rectangle_u"], g["rectangle_v"]), ud, vd, label="bounding rectangle").opts(
                 color=GRID, line_dash="dotted", line_width=1.5)]
    if np.size(g.get("outer_u", [])):
        parts.append(hv.Curve((g["outer_u"], g["outer_v"]), ud, vd, label=f"envelope ({g.get('envelope', '')})").opts(
            color=HAT, line_width=1.5))
    parts.append(hv.Curve((g["boundary_u"], g["boundary_v"]), ud, vd, label="region A").opts(
        color="#222222", line_width=2))
    if np.size(g.get("inner_u", [])):
        parts.append(hv.Curve((g["inner_u"], g["inner_v"]), ud, vd, label="squeeze").opts(
            color=SQUEEZE, line_width=1.5, line_dash="dashed"))
    parts += _candidates_overlay(g["candidates_u"], g["candidates_v"], g["candidates_label"], ud, vd)
    note = g.get("coordinates")
    title = "region A, its bounding rectangle, envelope and squeeze, with candidate points"
    if note:
        title = f"region A in {note.split(':')[0]} coordinates, with candidate points"
    return _finish(hv.Overlay(parts), **_common(title, width, height + 80,
                                                xformatter="%.3g", yformatter="%.3g"))


def _fallback_plot(fb, method, unit, width, height):
    xd = hv.Dimension("x", label=age_label(unit))
    yd = hv.Dimension("y", label="density")
    if not fb:
        return hv.Curve(([], []), xd, yd).opts(**_common(f"{method}: no picture available", width, height))
    layers = []
    draws = np.asarray(fb.get("draws", []), dtype=float)
    if draws.size:
        lo, hi = float(fb["x"][0]), float(fb["x"][-1])
        counts, edges = np.histogram(draws[(draws >= lo) & (draws <= hi)], bins=60, range=(lo, hi))
        dens = counts / max(draws.size, 1) / np.diff(edges)
        layers.append(hv.Histogram((edges, dens), kdims=[xd], vdims=[yd], label="draws").opts(
            fill_color=DRAWS, fill_alpha=0.5, line_color=DRAWS))
    layers.append(hv.Curve((fb["x"], fb["pdf"]), xd, yd, label="model density").opts(color=MODEL, line_width=2))
    return _finish(hv.Overlay(layers), **_common(f"{method}: the density and the draws (no method picture)",
                                                 width, height))


# ---- the method comparison --------------------------------------------------------------------

def _dots(values, label, key, title, width, height, **extra):
    """A dot plot: one point per method on a categorical axis (no bars floating on a log axis)."""
    md = hv.Dimension("method", label="method")
    vd = hv.Dimension(key, label=label)
    return hv.Scatter(values, md, vd).opts(color=DRAWS, size=10, tools=["hover"],
                                           **_common(title, width, height, show_legend=False, **extra))


def comparison_charts(rows: list[dict], planned: int | None = None, width=None, height=220) -> list:
    """Dot plots of the measured figures (throughput with its spread over the timed repeats,
    set-up, u-error on a log axis, table memory) and the total cost of n draws per method,
    set-up + n x cost per draw, on log-log axes where the cheapest method can be read off."""
    measured = [r for r in rows if r.get("applicable") and r.get("seconds_per_draw")]
    if not measured:
        return []
    out = []
    md = hv.Dimension("method", label="method")
    dps = hv.Dimension("dps", label="draws per second")
    points = [(r["method"], 1.0 / r["seconds_per_draw"]) for r in measured]
    whiskers = [(r["method"], 1.0 / r["seconds_per_draw"],
                 1.0 / r["seconds_per_draw"] - 1.0 / r["seconds_per_draw_high"],
                 1.0 / r["seconds_per_draw_low"] - 1.0 / r["seconds_per_draw"]) for r in measured]
    repeats = max(int(r.get("repeats") or 0) for r in measured)
    spread = hv.ErrorBars(whiskers, md, [dps, "below", "above"]).opts(color=GRID, line_width=2)
    dots = hv.Scatter(points, md, dps).opts(color=DRAWS, size=10, tools=["hover"])
    top = max(1.0 / r["seconds_per_draw_low"] for r in measured)
    out.append(_finish(spread * dots, **_common(f"draws/second: median, range of {repeats} runs",
                                                width, height, show_legend=False, ylim=(0, 1.1 * top),
                                                yformatter=count_formatter())))
    out.append(_dots([(r["method"], float(r["setup_ms"])) for r in measured], "set-up (ms)", "setup",
                     "set-up time (ms), fastest of up to 3 fits", width, height, ylim=(0, None)))

    n = np.geomspace(1e3, 1e10, 120)
    nd = hv.Dimension("n", label="draws taken")
    td = hv.Dimension("seconds", label="total time (s)")
    palette = [DRAWS, MODEL, HAT, SQUEEZE, "#6b4c9a", "#222222"]
    curves = [hv.Curve((n, 1e-3 * float(r["setup_ms"]) + n * float(r["seconds_per_draw"])), nd, td,
                       label=r["method"]).opts(color=palette[i % len(palette)], line_width=2)
              for i, r in enumerate(measured)]
    layers = list(curves)
    if planned:
        layers.append(hv.VLine(float(planned)).opts(color=GRID, line_dash="dashed", line_width=1.5))
    title = "total time = set-up + draws × cost per draw"
    out.append(_finish(hv.Overlay(layers), **_common(title, width, height, logx=True, logy=True, tools=["hover"])))

    errs = [(r["method"], max(float(r["u_error"]), 1e-17)) for r in measured
            if r.get("u_error") is not None and math.isfinite(float(r["u_error"]))]
    exact = [r["method"] for r in measured if r.get("u_error") is None]
    if errs:
        title = "estimated u-error" + ("; exact methods omitted" if exact else "")
        top = max(v for _, v in errs)
        out.append(_dots(errs, "u-error (estimate)", "u_error", title, width, height, logy=True,
                         ylim=(1e-17, max(top * 10, 1e-14))))
    mem = [(r["method"], float(r["table_bytes"])) for r in measured if r.get("table_bytes") is not None]
    if mem:
        out.append(_dots(mem, "table memory (bytes)", "bytes", "memory of the tables (bytes)", width, height,
                         ylim=(0, None), yformatter=count_formatter()))
    return out
