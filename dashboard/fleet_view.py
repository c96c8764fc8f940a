"""The fleet step of the page: widgets for the fleet, horizon, costs, preventive age and warranty,
and the plots of its figures; it presents a ``FleetStep`` and runs studies off the event loop.

Pictures come from ``fleet_plots`` (Monte Carlo bands with the exact references on top: the
renewal equation, Barlow & Proschan's cost rate, the warranty expectation).
"""
from __future__ import annotations

import asyncio
import html
import logging

import panel as pn

from lifedraw.engine.cautions import FLEET_CAUTION
from lifedraw.engine.systems import system_from_scenario

from . import fleet_plots
from .html_tables import fleet_summary_html
from .fleet_state import MAX_RUNS, MAX_UNITS, FleetStep, fleet_payload
from .views import STEP_STYLES, HEAD_CSS, TABLE_CSS, TEXT_CSS

log = logging.getLogger("lifedraw.dashboard")

STEP_NUMBER = 7
TITLE = "Fleet, spares, warranty and replacement age"
BLURB = ("A fleet of these units over a horizon: failures per period (simulated, with the exact expectation "
         "from the renewal equation), the spares that cover the demand, the replacement age that minimises the "
         "cost per unit time, and free-replacement warranty claims.")
POLL_S = 0.25
PLOT_WIDTH, PLOT_HEIGHT = 560, 300


class FleetView:
    """Step 7: presents a ``FleetStep``; the DrawingBoard ``state`` supplies the model and the seed."""

    def __init__(self, state, fleet: FleetStep | None = None):
        self.state = state
        self.fleet = fleet or FleetStep()
        self.fleet.adopt(state.scenario, state.target)
        self._shown_scenario = state.scenario.name
        self._progress = 0.0
        f = self.fleet
        number = dict(width=150, margin=(4, 8))
        self.widgets = {
            "units": pn.widgets.IntInput.from_param(f.param.units, name="Units in service", start=1, end=MAX_UNITS,
                                                   **number),
            "horizon": pn.widgets.FloatInput.from_param(f.param.horizon, name="Horizon", start=0, **number),
            "period": pn.widgets.FloatInput.from_param(f.param.period, name="Period", start=0, **number),
            "runs": pn.widgets.IntInput.from_param(f.param.runs, name="Simulated runs", start=2, end=MAX_RUNS, **number),
            "cost_preventive": pn.widgets.FloatInput.from_param(f.param.cost_preventive, name="Planned replacement cost",
                                                                start=0, **number),
            "cost_failure": pn.widgets.FloatInput.from_param(f.param.cost_failure, name="Failure replacement cost",
                                                             start=0, **number),
            "preventive_age": pn.widgets.FloatInput.from_param(f.param.preventive_age,
                                                               name="Replace at age (0: never)", start=0, **number),
            "warranty": pn.widgets.FloatInput.from_param(f.param.warranty, name="Warranty cover (0: none)", start=0,
                                                         **number),
            "sales": pn.widgets.TextInput.from_param(f.param.sales, name="Units sold per period",
                                                     placeholder="e.g. 60, 90, 120", width=320, margin=(4, 8)),
        }
        self.run = pn.widgets.Button(label="Simulate the fleet", button_type="primary", width=190,
                                     margin=(22, 8, 0, 8), css_classes=["ld-fleet-run"])
        self.run.on_click(self._run)
        self.bar = pn.indicators.Progress(value=0, max=100, width=260, visible=False, margin=(30, 8, 0, 8),
                                          css_classes=["ld-fleet-progress"])
        self.status = self._html(css_classes=["ld-fleet-status"])
        self.error = pn.pane.Alert("", alert_type="danger", visible=False, sizing_mode="stretch_width", margin=(4, 10),
                                   css_classes=["ld-fleet-error"])
        self.summary = self._html(css_classes=["ld-fleet-summary"])
        self.plots = pn.FlexBox(sizing_mode="stretch_width", margin=0, css_classes=["ld-fleet-plots"])
        self.caution = pn.pane.Alert(f"<b>Assumptions.</b> {html.escape(FLEET_CAUTION)}", alert_type="warning",
                                     sizing_mode="stretch_width", margin=(6, 10), css_classes=["ld-fleet-caution"])
        f.param.watch(lambda *events: self._show(), ["result", "error", "note"])
        state.param.watch(lambda e: self._model_changed(), "version")
        self._show()

    @staticmethod
    def _html(text="", **kw):
        return pn.pane.HTML(text, stylesheets=[TEXT_CSS, TABLE_CSS], sizing_mode="stretch_width", margin=(0, 10), **kw)

    def panel(self) -> pn.Column:
        heading = pn.pane.HTML(f'<h2><span class="ld-num">{STEP_NUMBER}</span>{html.escape(TITLE)}</h2>'
                               f"<p>{html.escape(BLURB)}</p>", stylesheets=[HEAD_CSS], sizing_mode="stretch_width",
                               margin=(0, 10))
        w = self.widgets
        rows = [pn.Row(w["units"], w["horizon"], w["period"], w["runs"], margin=0),
                pn.Row(w["cost_preventive"], w["cost_failure"], w["preventive_age"], margin=0),
                pn.Row(w["warranty"], w["sales"], margin=0),
                pn.Row(self.run, self.bar, margin=0)]
        return pn.Column(heading, *rows, self.error, self.status, self.summary, self.plots, self.caution,
                         sizing_mode="stretch_width", styles=STEP_STYLES, margin=(8, 0),
                         css_classes=[f"ld-step-{STEP_NUMBER}", "ld-step-fleet"], name=TITLE)

    # ---- model changes ------------------------------------------------------------------------
    def _model_changed(self):
        s = self.state
        if s.scenario.name != self._shown_scenario:
            self._shown_scenario = s.scenario.name
            self.fleet.adopt(s.scenario, s.target)
        elif self.fleet.result is not None:
            self.fleet.note = "The model changed since these figures: press Simulate the fleet again."

    # ---- the run ------------------------------------------------------------------------------------
    def _model(self):
        s = self.state
        if s.scenario.system:
            return system_from_scenario(s.scenario, **s.values), None
        return s.target, s.sampler

    def _report_progress(self, fraction: float) -> None:
        # Called from the worker thread: only a float changes hands; the event loop shows it.
        self._progress = float(fraction)

    async def _run(self, event):
        s, f = self.state, self.fleet
        try:
            settings = f.settings()
        except Exception as err:
            f.fail(err)
            return
        self.run.disabled = True
        self.bar.value, self.bar.visible = 0, True
        self._progress = 0.0
        self.status.object = '<p class="ld-muted">Simulating the fleet…</p>'
        version, name = s.version, s.scenario.name
        try:
            model, sampler = self._model()
            loop = asyncio.get_running_loop()
            job = loop.run_in_executor(None, fleet_payload, model, sampler, settings, int(s.seed),
                                       self._report_progress)
            while not job.done():
                self.bar.value = int(100 * self._progress)
                await asyncio.sleep(POLL_S)
            outcome = await job
            what = f"{s.scenario.title} · seed {int(s.seed)}"
            if s.version != version or s.scenario.name != name:
                what += " (the model changed during the run: these figures belong to the previous model)"
            with pn.io.hold(freeze=True):
                f.set_result(outcome, what)
        except Exception as err:
            log.exception("unexpected error in the fleet step")
            f.fail(err)
        finally:
            self.run.disabled = False
            self.bar.visible = False

    # ---- presenting -------------------------------------------------------------------------------
    def _show(self):
        f, unit = self.fleet, self.state.scenario.time_unit
        self.error.object = html.escape(f.error)
        self.error.visible = bool(f.error)
        data = f.result
        if data is None:
            self.status.object = ('<p class="ld-muted">Set the fleet and press <b>Simulate the fleet</b>. '
                                  f"Times are in {html.escape(unit)}.</p>")
            self.summary.object = ""
            if self.plots.objects:
                self.plots[:] = []
            return
        self.status.object = f'<p class="ld-small ld-muted">{html.escape(f.note)}</p>'
        self.summary.object = fleet_summary_html(data, unit)
        size = dict(width=PLOT_WIDTH, height=PLOT_HEIGHT)
        figures = [fleet_plots.failures_plot(data, unit, **size), fleet_plots.spares_plot(data, **size)]
        if data.get("age_replacement"):
            figures.append(fleet_plots.cost_rate_plot(data["age_replacement"], unit, **size))
        if data.get("warranty"):
            figures.append(fleet_plots.warranty_plot(data["warranty"], unit, **size))
        self.plots[:] = [pn.pane.HoloViews(fig, margin=(0, 6), css_classes=["ld-fleet-plot"]) for fig in figures]
