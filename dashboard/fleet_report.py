"""The fleet section of the standalone HTML report: the scenario's [fleet] study (or the default one)
with its figures and the exact references beside the Monte Carlo ones (engine.fleet_study).

Same pictures as the page's fleet step (fleet_plots), ordered from plain data (picture_process) and
drawn with the report's other pictures.
"""
from __future__ import annotations

import html
from typing import Callable

from lifedraw.engine.cautions import FLEET_CAUTION
from lifedraw.engine.fleet_study import default_fleet_settings
from lifedraw.engine.systems import system_from_scenario

from .fleet_state import fleet_payload
from .html_tables import fleet_summary_html
from .picture_process import PictureOrder, order


def fleet_section(scenario, target, sampler, seed: int, width: int) -> tuple[list[PictureOrder],
                                                                             Callable[[list], str]]:
    """The pictures to order (``fleet_plots``), and a function of their divs that writes the section."""
    settings = scenario.fleet if scenario.fleet is not None else default_fleet_settings(target)
    if scenario.system:
        model, drawer = system_from_scenario(scenario), None
    else:
        model, drawer = target, sampler
    data = fleet_payload(model, drawer, settings, seed)
    unit = scenario.time_unit
    e = html.escape
    if isinstance(data, Exception):
        return [], lambda divs: (f'<section id="fleet"><h2>Fleet, spares, warranty and replacement age</h2>'
                                 f'<p>The fleet study could not run: {e(str(data))}</p></section>')
    half = width // 2 - 10
    figures = [order("fleet_plots", "failures_plot", data, unit, width=half, height=300),
               order("fleet_plots", "spares_plot", data, width=half, height=300)]
    if data.get("age_replacement"):
        figures.append(order("fleet_plots", "cost_rate_plot", data["age_replacement"], unit, width=half, height=300))
    if data.get("warranty"):
        figures.append(order("fleet_plots", "warranty_plot", data["warranty"], unit, width=half, height=300))
    source = ("the scenario's [fleet] table" if scenario.fleet is not None else
              "no [fleet] table in the scenario: 100 new units over three mean lives")
    whole = " (the whole system is the unit)" if scenario.system else ""

    def section(divs: list) -> str:
        cells = "".join(f'<div class="plot" style="display:inline-block;vertical-align:top">{d}</div>' for d in divs)
        return f"""
<section id="fleet"><h2>Fleet, spares, warranty and replacement age</h2>
<p class="muted">Settings from {e(source)}{e(whole)}. Failures per period: the central 90% of
{data['runs']:,} simulated runs with their mean, beside the exact expectation from the renewal equation.
Spares: the empirical service-level quantile of the horizon's demand with its distribution-free interval.
Replacement age: Barlow &amp; Proschan's cost rate C(T). Warranty: free replacement, each replacement's
cover ending with the original's, units sold at the start of each period.</p>
{fleet_summary_html(data, unit)}
<div>{cells}</div>
<div class="caution"><b>Assumptions.</b> {e(FLEET_CAUTION)}</div>
</section>"""

    return figures, section
