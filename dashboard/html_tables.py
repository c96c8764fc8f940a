"""The drawing board's tables as HTML text: sampler counters, the method comparison, life figures beside
the model's exact values, the scenario's parameters and the fleet study's key numbers; shared by the live
page and the standalone report.

Plain strings from plain numbers (no plotting library), every header and cell escaped (MarkupSafe) unless
it is ``Markup`` already; the report's main process writes them without loading HoloViews or Bokeh.
"""
from __future__ import annotations

import math

import numpy as np

from lifedraw.engine.life import inside_interval, verdict_legend

from .escaping import text
from .time_units import unit_singular


def fmt(value, digits: int = 4) -> str:
    """A number for a table: thousands separators for large values, significant digits otherwise."""
    if value is None:
        return "–"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    if isinstance(value, (float, np.floating)):
        v = float(value)
        if math.isnan(v):
            return "–"
        if math.isinf(v):
            return "∞" if v > 0 else "−∞"
        if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e9):
            return f"{v:.{digits}g}"
        if abs(v) >= 1000:
            return f"{v:,.0f}"
        return f"{v:.{digits}g}"
    return text(value)


def html_table(header: list[str], rows: list[list], css_class: str = "ld-table") -> str:
    """An HTML table (a plain string: Panel's HTML pane shows a ``Markup`` object as text); every
    header and cell is escaped unless it is ``Markup`` already."""
    head = "".join(f"<th>{text(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{text(c)}</td>" for c in row) + "</tr>" for row in rows)
    return f'<table class="{text(css_class)}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


_COUNTER_LABELS = {
    "method": "method", "variant": "variant", "samples": "draws", "setup_seconds": "set-up (s)",
    "uniforms_per_sample": "uniforms per draw", "density_evals_per_sample": "density evaluations per draw",
    "acceptance_rate": "acceptance rate", "squeeze_rate": "share decided by the squeeze",
    "table_bytes": "table size (bytes)", "u_error": "u-error (estimate at set-up)", "tolerance": "tolerance",
}


def counters_table(stats: dict, columns: int = 1) -> str:
    """The sampler's counters (sampler.stats), known ones first and in plain words,
    split into ``columns`` side-by-side tables."""
    rows = []
    for key, label in _COUNTER_LABELS.items():
        if key in stats:
            rows.append([label, fmt(stats[key])])
    for key, value in stats.items():
        if key in _COUNTER_LABELS or isinstance(value, (dict, list, tuple)):
            continue
        rows.append([key.replace("_", " "), fmt(value)])
    per = max(1, -(-len(rows) // max(1, columns)))
    tables = [html_table(["counter", "value"], rows[i:i + per], "ld-table ld-compact")
              for i in range(0, len(rows), per)]
    if len(tables) == 1:
        return tables[0]
    blocks = "".join(f'<div style="flex:1 1 0;min-width:240px">{t}</div>' for t in tables)
    return f'<div style="display:flex;gap:28px;align-items:flex-start">{blocks}</div>'


def comparison_table(rows: list[dict]) -> str:
    header = ["method", "variant", "set-up ms", "ns per draw (range)", "draws/s", "acceptance", "uniforms/draw",
              "f evals/draw", "squeeze share", "table bytes", "u-error (estimate)"]
    head = "".join(f"<th>{text(h)}</th>" for h in header)
    body = []
    for r in rows:
        name = f"<td><b>{text(r['method'])}</b></td>"
        if not r.get("applicable"):
            body.append(f'<tr class="ld-na">{name}<td colspan="{len(header) - 1}" class="ld-muted">'
                        f"not applicable: {text(r.get('reason', ''))}</td></tr>")
            continue
        values = [text(r.get("variant") or ""), fmt(r.get("setup_ms"), 3), _per_draw(r),
                 count_text(r.get("draws_per_second")), fmt(r.get("acceptance_rate")),
                 fmt(r.get("uniforms_per_sample")), fmt(r.get("density_evals_per_sample")),
                 fmt(r.get("squeeze_rate")), fmt(r.get("table_bytes")), fmt(r.get("u_error"), 2)]
        body.append("<tr>" + name + "".join(f"<td>{c}</td>" for c in values) + "</tr>")
    return (f'<table class="ld-table ld-comparison"><thead><tr>{head}</tr></thead>'
            f"<tbody>{''.join(body)}</tbody></table>")


def _per_draw(r: dict) -> str:
    if not r.get("seconds_per_draw"):
        return "–"
    low, high = r.get("seconds_per_draw_low"), r.get("seconds_per_draw_high")
    spread = f" ({1e9 * low:.3g}–{1e9 * high:.3g})" if low and high else ""
    return f"{1e9 * r['seconds_per_draw']:.3g}{spread}"


def count_text(value) -> str:
    """60 M, 4.3 M, 950 k: counts the way the charts label them (M for millions)."""
    if value is None:
        return "–"
    v = float(value)
    for suffix, size in (("G", 1e9), ("M", 1e6), ("k", 1e4)):
        if abs(v) >= size:
            return f"{v / (1e3 if suffix == 'k' else size):.3g} {suffix}"
    return f"{v:,.0f}"


def life_table(figures: dict, unit: str) -> str:
    """Life figures of the draws (estimate and interval) beside the model's exact values."""
    sample, exact = figures.get("sample"), figures.get("exact")
    if exact is None:
        return '<p class="ld-muted">The model\'s exact figures could not be computed.</p>'
    conf = sample["confidence"] if sample else 0.95
    header = ["figure", "from the draws", f"{conf:.0%} interval", "model (exact)", "inside?"]
    rows = []

    def row(name, est, lo, hi, model, pct=False):
        f = (lambda v: "–" if v is None else f"{100 * v:.3f} %") if pct else fmt
        inside = "–"
        if est is not None and model is not None and lo is not None and hi is not None and math.isfinite(model):
            inside = "✓" if inside_interval(model, lo, hi) else "✗"
        rows.append([name, f(est), "–" if lo is None else f"{f(lo)} to {f(hi)}", f(model), inside])

    m = sample["mttf"] if sample else {}
    row(f"MTTF ({unit})", m.get("estimate"), m.get("lower"), m.get("upper"), exact["mttf"]["value"])
    for name, b in exact["b_lives"].items():
        s = sample["b_lives"][name] if sample else {}
        row(f"{name} life ({unit})", s.get("estimate"), s.get("lower"), s.get("upper"), b["value"])
    for i, r in enumerate(exact["reliability"]):
        s = sample["reliability"][i] if sample else {}
        row(f"R({fmt(r['time'])} {unit})", s.get("estimate"), s.get("lower"), s.get("upper"), r["value"], pct=True)
    legend = (f'<p class="ld-small ld-muted ld-verdict-legend">{text(verdict_legend(conf))}</p>'
              if sample else "")
    return html_table(header, rows) + legend


def parameters_table(parameters: dict) -> str:
    rows = [[p.name, p.label or "", fmt(p.value), f"{fmt(p.low)} to {fmt(p.high)}"]
            for p in parameters.values()]
    return html_table(["parameter", "meaning", "value", "slider range"], rows)


def fleet_summary_html(data: dict, unit: str) -> str:
    """The key numbers: fleet, totals with their exact references, spares, optimum, warranty."""
    e = str       # plain text: html_table escapes every cell (escaping here too would show "&lt;")
    rows = [["fleet", f"{data['units']:,} units, {data['runs']:,} runs, seed {data['seed']}, method {e(data['method'])}"],
            ["horizon", f"{fmt(data['horizon'])} {e(unit)} in {len(data['edges']) - 1} periods of {fmt(data['period'])}"],
            ["failures over the horizon", f"simulated mean {fmt(data['total_mean'])}"
             + (f"; exact {fmt(data['total_exact'])}" if data.get("total_exact") is not None else
                "; exact: not solved (more than 100 distinct ages)")]]
    if data.get("preventive_age") is not None:
        rows.append(["preventive replacement", f"at age {fmt(data['preventive_age'])} {e(unit)}; mean "
                                               f"{fmt(data['preventive_mean'])} over the horizon"])
    for level, stock, low, high in zip(data["levels"], data["stock"], data["low"], data["high"]):
        interval = f"{fmt(low) if np.isfinite(low) else '–'} to {fmt(high) if np.isfinite(high) else '–'}"
        rows.append([f"spares for a {level:.0%} service level", f"{stock:,.0f} (95% interval {interval})"])
    replacement = data.get("age_replacement")
    if replacement:
        per = f"per {e(unit_singular(unit) or 'time unit')} and unit"
        rows.append(["run to failure", f"{fmt(replacement['cost_rate_run_to_failure'])} {per} (cost_failure / MTTF)"])
        if replacement["optimal_age"] is None:
            rows.append(["optimal replacement age", "none: no finite age beats running to failure here"])
        else:
            rows.append(["optimal replacement age", f"{fmt(replacement['optimal_age'])} {e(unit)}: "
                                                    f"{fmt(replacement['cost_rate'])} {per} "
                                                    f"({replacement['saving']:.1%} below run to failure)"])
    warranty = data.get("warranty")
    if warranty:
        rows.append(["warranty claims in all", f"exact {fmt(warranty['total_expected'])}, simulated mean "
                                               f"{fmt(warranty['total_mean'])} (cover {fmt(warranty['warranty'])} "
                                               f"{e(unit)}, units sold at the start of each period)"])
    return html_table(["figure", "value"], rows, "ld-table ld-fleet-summary")
