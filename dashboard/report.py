"""The standalone HTML report of a scenario: model, draws against the model, method geometry,
method comparison and life figures, with Bokeh's JavaScript inside the file so it opens offline.

One function, ``write_report``, serves both ``lifedraw report`` and the dashboard's
Report step. Plots are HoloViews elements rendered to plain Bokeh models
(``hv.render``) and packed with BokehJS, gzip-compressed, into the page (``packed_plots``);
every text and table is plain HTML. No Panel template. The pictures are ordered here from plain data and
drawn where ``pictures`` draws them (``picture_process``): the command line draws them in a second
process, so this module loads no plotting library itself.
"""
from __future__ import annotations

import datetime as _dt
import importlib.metadata
import platform
import time
from pathlib import Path

import numpy as np

from lifedraw import engine
from lifedraw.engine import ModelError, fit
from lifedraw.engine.cautions import CAUTION
from lifedraw.engine.compare import MethodResult, compare_methods, decide
from lifedraw.engine.scenarios import Scenario

from . import html_tables as tables
from .cdf_table import CdfTable, histogram_edges
from .check_data import histogram_payload, model_on_bins, pp_payload, qq_payload
from .draw_accumulator import DrawAccumulator
from .escaping import file_stem, paragraphs, text
from .fleet_report import fleet_section
from .life_curves import hazard_payload, weibull_payload
from .picture_process import Pictures, order

PLOT_WIDTH = 880
PLANNED_DRAWS = 1_000_000
COMPARE_N = 100_000
PACKAGES = ("lifedraw", "numpy", "scipy", "bokeh", "holoviews", "panel", "param")

PAGE_CSS = """
body { font-family: -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; color: #1f2933;
       background: #f5f6f8; margin: 0; }
main { max-width: 920px; margin: 0 auto; padding: 24px 20px 48px 20px; }
header h1 { font-size: 24px; margin: 0 0 2px 0; }
header p { margin: 0; color: #4b5563; }
section { background: white; border: 1px solid #dfe3e8; border-radius: 8px; padding: 12px 20px 16px 20px;
          margin: 14px 0; }
h2 { font-size: 18px; margin: 4px 0 8px 0; }
p { line-height: 1.5; margin: 6px 0; }
pre { background: #f4f6f8; border: 1px solid #e3e6ea; border-radius: 4px; padding: 8px 10px; font-size: 12.5px;
      white-space: pre-wrap; }
.caution { background: #fff7e0; border: 1px solid #f0d48a; border-radius: 6px; padding: 10px 14px; }
.muted { color: #6b7280; font-size: 13px; }
.plot { margin: 8px 0; }
table.ld-table { border-collapse: collapse; font-size: 13px; width: 100%; }
table.ld-table th { text-align: left; font-weight: 600; border-bottom: 2px solid #d0d4da; padding: 5px 10px 5px 0; }
table.ld-table td { border-bottom: 1px solid #eceef1; padding: 4px 10px 4px 0; vertical-align: top;
                    font-variant-numeric: tabular-nums; }
table.ld-compact { width: auto; }
.ld-muted { color: #6b7280; }
"""


def default_report_path(directory, scenario: Scenario) -> Path:
    """``DIR/lifedraw-<scenario>-<date>-<time>.html``."""
    stamp = time.strftime("%Y%m%d-%H%M%S")
    safe = file_stem(scenario.name, "scenario")
    return Path(directory) / f"lifedraw-{safe}-{stamp}.html"


def write_report(scenario: Scenario, path, n: int | None = None, seed: int | None = None,
                 method: str | None = None, tolerance: float | None = None,
                 comparison: list | None = None, compare_n: int = COMPARE_N,
                 planned_draws: int = PLANNED_DRAWS, pictures: Pictures | None = None) -> Path:
    """Draw ``n`` lifetimes of ``scenario`` with ``seed`` and write the report to ``path``.

    Defaults come from the scenario's run table. ``comparison`` reuses rows
    already measured (``MethodResult`` or dicts); without it the methods are
    measured now with ``compare_n`` draws each. ``pictures`` draws the plots (``picture_process``:
    a ``PictureProcess`` draws them in a second process; default: this one). Returns the path written.
    """
    path = Path(path)
    if path.suffix.lower() not in (".html", ".htm"):
        raise ModelError("output", f"the report is an HTML file; give a name ending in .html, got {path.name!r}")
    text = build_report(scenario, n=n, seed=seed, method=method, tolerance=tolerance,
                        comparison=comparison, compare_n=compare_n, planned_draws=planned_draws,
                        pictures=pictures)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


def build_report(scenario: Scenario, n: int | None = None, seed: int | None = None, method: str | None = None,
                 tolerance: float | None = None, comparison: list | None = None,
                 compare_n: int = COMPARE_N, planned_draws: int = PLANNED_DRAWS,
                 pictures: Pictures | None = None) -> str:
    """The report as one HTML string (see ``write_report``)."""
    n = int(scenario.sample_size if n is None else n)
    if n < 1000:
        raise ModelError("n", f"a report needs at least 1,000 draws, got {n}")
    seed = int(scenario.seed if seed is None else seed)
    method = method or scenario.method
    tolerance = float(scenario.tolerance if tolerance is None else tolerance)
    unit = scenario.time_unit
    pictures = Pictures() if pictures is None else pictures
    half = PLOT_WIDTH // 2 - 10

    target = scenario.target()
    sampler = fit(target, method, tolerance)
    start = time.perf_counter()
    draws = sampler.sample(n, seed)
    seconds = time.perf_counter() - start
    stats = dict(sampler.stats)

    table = CdfTable(target, draws)
    edges, view_right = histogram_edges(target, table)
    acc = DrawAccumulator(edges, table, capacity=n, rng=seed)
    acc.add(draws)

    # The pictures of the draws are ordered first: a picture process draws them while the checks,
    # the method comparison and the fleet study run here.
    hist = pictures.add(order("plots", "density_histogram",
                              histogram_payload(acc, model_on_bins(target, edges), view_right, False, unit),
                              width=PLOT_WIDTH, height=340))
    qq = pictures.add(order("plots", "qq_plot", qq_payload(acc, table, unit), width=half, height=320))
    pp = pictures.add(order("plots", "pp_plot", pp_payload(acc, table), width=half, height=320))
    hazard_data = hazard_payload(target, acc.edges, acc.counts, acc.below, acc.n, view_right, False, unit)
    hazard = pictures.add(order("reliability_plots", "hazard_plot", hazard_data, width=half, height=320))
    cumulative = pictures.add(order("reliability_plots", "cumulative_hazard_plot", hazard_data,
                                    width=half, height=320))
    weibull = pictures.add(order("reliability_plots", "weibull_plot",
                                 weibull_payload(target, acc.sample_quantiles, int(acc.x.size), n, unit),
                                 width=PLOT_WIDTH, height=360))
    fallback = None
    if not target.atoms.size:
        x = np.linspace(edges[0], view_right, 400)
        fallback = {"x": x, "pdf": target.pdf(x), "draws": draws[:50_000]}
    geometry = pictures.add(order("plots", "geometry_plots", sampler.geometry(400, 0), unit, fallback=fallback,
                                  width=PLOT_WIDTH, height=300, view=(float(edges[0]), float(view_right))))

    checked = engine.check(draws, target, rng=seed)
    life = {"sample": engine.life_summary(draws, scenario.mission_times),
            "exact": engine.exact_life_figures(target, scenario.mission_times), "n": n, "total": n}
    if comparison is None:
        comparison = compare_methods(target, n=compare_n, rng=seed, tolerance=tolerance)
    rows = [r.to_dict() if isinstance(r, MethodResult) else dict(r) for r in comparison]
    bars = pictures.add(order("plots", "comparison_charts", rows, planned_draws, width=half, height=240))
    decision = decide(rows, planned_draws, tolerance)

    fleet_orders, fleet_html = fleet_section(scenario, target, sampler, seed, PLOT_WIDTH)
    fleet = [pictures.add(o) for o in fleet_orders]

    drawn = pictures.packed()
    divs = drawn.groups
    (d_hist,), (d_qq,), (d_pp,) = divs[hist], divs[qq], divs[pp]
    (d_hazard,), (d_cumulative,), (d_weibull,) = divs[hazard], divs[cumulative], divs[weibull]
    d_geom, d_bars = divs[geometry], divs[bars]
    d_fleet = [d for i in fleet for d in divs[i]]

    now = _dt.datetime.now().astimezone()
    e = text     # every piece of the scenario's text is escaped where it enters the page
    story = paragraphs(scenario.story)
    gof = _goodness_table(checked)
    params = tables.parameters_table(scenario.parameters) if scenario.parameters else \
        '<p class="muted">No parameters: the model is the recorded field data.</p>'

    def grid(items):
        blocks = "".join(f'<div class="plot" style="display:inline-block;vertical-align:top">{d}</div>' for d in items)
        return f"<div>{blocks}</div>"

    body = f"""
<main>
<header>
  <h1>lifedraw report — {e(scenario.title)}</h1>
  <p>Scenario <code>{e(scenario.name)}</code> · written {e(now.strftime('%Y-%m-%d %H:%M %Z'))}</p>
</header>
<div class="caution"><b>Caution.</b> {e(CAUTION)}</div>
{drawn.note}

<section id="model"><h2>Model</h2>
<p>{story}</p>
<pre>{e(target.describe())}</pre>
<p class="muted">Formula: <code>{e(target.formula())}</code> · ages in {e(unit)}.</p>
{params}
</section>

<section id="run"><h2>Run</h2>
{tables.html_table(["setting", "value"], [
    ["method", f"{sampler.method}{' (' + str(stats['variant']) + ')' if stats.get('variant') else ''}"],
    ["why", sampler.reason], ["published method", type(sampler).reference],
    ["seed", str(seed)], ["sample size", f"{n:,}"], ["tolerance (u-error)", f"{tolerance:g}"],
    ["set-up", f"{1e3 * stats['setup_seconds']:.1f} ms"], ["drawing time", f"{seconds:.3f} s"],
    ["mission times", ", ".join(f"{tables.fmt(t)} {unit}" for t in scenario.mission_times) or "none"]],
    "ld-table ld-compact")}
</section>

<section id="check"><h2>Draws against the model</h2>
<div class="plot">{d_hist}</div>
{grid([d_qq, d_pp])}
{gof}
</section>

<section id="hazard"><h2>Hazard rate and probability plot</h2>
<p class="muted">The model's hazard rate h(t) beside the actuarial estimate per bin from the draws, with exact
Poisson {hazard_data['band']:.0%} bands; the cumulative hazard H(t) = −ln R(t); and the probability plot on Weibull
scales (ln t against ln(−ln(1 − F))), where a Weibull model is a straight line of slope β.</p>
{grid([d_hazard, d_cumulative])}
<div class="plot">{d_weibull}</div>
</section>

<section id="geometry"><h2>Method geometry: {e(sampler.method)}</h2>
{''.join(f'<div class="plot">{d}</div>' for d in d_geom)}
<h3>Sampler counters</h3>
{tables.counters_table(stats, columns=2)}
</section>

<section id="comparison"><h2>Method comparison</h2>
<p class="ld-verdict"><b>{e(decision.sentence)}</b></p>
<p class="muted">Every method measured on this machine when the report was written (or when the page
measured it), one process: one untimed warm-up batch, then several timed batches; the cost per draw is their
median, the range their fastest and slowest. The verdict weighs set-up plus cost per draw for
{tables.count_text(planned_draws)} draws among the methods that reach the tolerance.</p>
{tables.comparison_table(rows)}
{grid(d_bars)}
</section>

<section id="life"><h2>Life figures</h2>
{tables.life_table(life, unit)}
<p class="muted">From all {n:,} draws. MTTF: normal-theory interval; B-lives: distribution-free
order-statistic intervals (Hahn &amp; Meeker 1991); R(t): Wilson score intervals. The model's exact
values come from the model itself.</p>
</section>
{fleet_html(d_fleet)}

<section id="versions"><h2>Software</h2>
{tables.html_table(["package", "version"], [[k, v] for k, v in _versions().items()], "ld-table ld-compact")}
</section>

<div class="caution"><b>Caution.</b> {e(CAUTION)} The draws are simulated from the stated model;
they say nothing the model does not already assume.</div>
</main>"""

    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>lifedraw report — {e(scenario.title)}</title>
<style>{PAGE_CSS}{drawn.css}</style>
</head>
<body>
{body}
{drawn.tail}
</body>
</html>
"""


def _goodness_table(rep) -> str:
    rows = [["Kolmogorov-Smirnov", tables.fmt(rep.ks_statistic), tables.fmt(rep.ks_pvalue)],
            ["Anderson-Darling", tables.fmt(rep.ad_statistic), tables.fmt(rep.ad_pvalue)],
            [f"chi-square ({rep.chi2_dof} dof)" if rep.chi2_dof else "chi-square", tables.fmt(rep.chi2_statistic),
             tables.fmt(rep.chi2_pvalue)]]
    verdict = "no test rejects the model at alpha = 0.001" if rep.passed() else \
        "at least one test rejects the model at alpha = 0.001"
    notes = "".join(f"<li>{text(n)}</li>" for n in rep.notes)
    return (f"<h3>Goodness of fit ({rep.n:,} draws): {verdict}</h3>"
            + tables.html_table(["test", "statistic", "p-value"], rows, "ld-table ld-compact")
            + '<p class="muted">A test rejects when its p-value is below 0.001; a correct sampler is still '
              "rejected by each test about 1 time in 1,000.</p>"
            + (f'<ul class="muted">{notes}</ul>' if notes else ""))


def _versions() -> dict[str, str]:
    out = {"python": platform.python_version()}
    for name in PACKAGES:
        try:
            out[name] = importlib.metadata.version(name)
        except importlib.metadata.PackageNotFoundError:
            out[name] = "not installed"
    out["platform"] = platform.platform(terse=True)
    return out
