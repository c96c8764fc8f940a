"""Step 3, the live check: histogram, hazard rate and cumulative hazard, Weibull probability
plot, QQ/PP, KS and acceptance traces; live plots are DynamicMaps fed by hv.streams.Pipe."""
from __future__ import annotations

import holoviews as hv
import panel as pn

from . import plots
from . import reliability_plots
from .step_base import Step, TEXT_CSS, text_pane


# ---- 3. live check ---------------------------------------------------------------------------

class LiveCheckStep(Step):
    number = 3
    title = "Live check"
    blurb = ("The draws so far against the model, batch by batch: histogram, hazard rate and cumulative hazard, "
             "probability plot on Weibull scales, QQ and PP plots, the running Kolmogorov-Smirnov p-value and "
             "acceptance rate, and the sampler's own counters.")

    def __init__(self, state):
        super().__init__(state)
        s = state
        self.log = pn.widgets.Checkbox(name="log density axis (shows the far tail)", value=s.log_scale)
        self.log.param.watch(lambda e: self.act(self._set_log, e.new), "value")
        self.hazard_log = pn.widgets.Checkbox(name="log-log axes for the hazard (a Weibull is a straight line)",
                                              value=s.hazard_log, css_classes=["ld-hazard-log"])
        self.hazard_log.param.watch(lambda e: self.act(self._set_hazard_log, e.new), "value")
        self.pipes = {k: hv.streams.Pipe(data=None) for k in ("hist", "qq", "pp", "trace", "hazard", "weibull")}
        self._push_all()
        self.hist = self._histogram_map()
        self.weibull = hv.DynamicMap(lambda data: reliability_plots.weibull_plot(data), streams=[self.pipes["weibull"]])
        self.qq = hv.DynamicMap(lambda data: plots.qq_plot(data), streams=[self.pipes["qq"]])
        self.pp = hv.DynamicMap(lambda data: plots.pp_plot(data), streams=[self.pipes["pp"]])
        self.ks_trace = hv.DynamicMap(lambda data: plots.trace_plot(data, "ks_p"), streams=[self.pipes["trace"]])
        self.acc_trace = hv.DynamicMap(lambda data: plots.trace_plot(data, "acceptance"),
                                       streams=[self.pipes["trace"]])
        for dm in (self.qq, self.pp, self.ks_trace, self.acc_trace, self.weibull):
            dm.opts(framewise=True, axiswise=True)
        pane = lambda dm, h: pn.pane.HoloViews(dm, sizing_mode="stretch_width", height=h, margin=(0, 6))
        self.hist_pane = pane(self.hist, 330)
        # Not linked to the other plots' axes: the hazard's age axis turns logarithmic on request,
        # and a shared range would carry the linear axis's 0 onto the log axis.
        self.hazard_panes = [pn.pane.HoloViews(dm, sizing_mode="stretch_width", height=300, margin=(0, 6),
                                               linked_axes=False) for dm in self._hazard_maps()]
        self.weibull_pane = pane(self.weibull, 340)
        self.panes = [pane(self.qq, 290), pane(self.pp, 290), pane(self.ks_trace, 250), pane(self.acc_trace, 250)]
        self.counters = text_pane()
        self.summary = text_pane()
        self.marker = text_pane(css_classes=["ld-marker"])
        self._stale = False
        s.param.watch(lambda e: self.refresh(), "batch")
        self.refresh(push=False)

    def _histogram_map(self) -> hv.DynamicMap:
        return hv.DynamicMap(lambda data: plots.density_histogram(data), streams=[self.pipes["hist"]]).opts(
            framewise=True, axiswise=True)

    def _hazard_maps(self) -> list:
        pipe = self.pipes["hazard"]
        return [hv.DynamicMap(lambda data: reliability_plots.hazard_plot(data), streams=[pipe]).opts(
                    framewise=True, axiswise=True),
                hv.DynamicMap(lambda data: reliability_plots.cumulative_hazard_plot(data), streams=[pipe]).opts(
                    framewise=True, axiswise=True)]

    def _set_hazard_log(self, value):
        # As for the histogram: a Bokeh axis cannot switch between linear and log in place.
        self.state.hazard_log = bool(value)
        self.pipes["hazard"].update(data=self.state.hazard_data())
        for pane_, dm in zip(self.hazard_panes, self._hazard_maps()):
            pane_.object = dm

    def body(self):
        qq, pp, ks, acc = self.panes
        return [pn.Row(self.log, self.marker, margin=0),
                self.hist_pane,
                self.hazard_log,
                pn.Row(*self.hazard_panes, sizing_mode="stretch_width", margin=0),
                self.weibull_pane,
                pn.Row(qq, pp, sizing_mode="stretch_width", margin=0),
                pn.Row(ks, acc, sizing_mode="stretch_width", margin=0),
                pn.pane.HTML("<h3>What the check says</h3>", stylesheets=[TEXT_CSS], margin=(0, 10)),
                self.summary,
                pn.pane.HTML("<h3>Sampler counters</h3>", stylesheets=[TEXT_CSS], margin=(0, 10)),
                self.counters]

    def _set_log(self, value):
        # A Bokeh axis cannot change between linear and log in place: draw the histogram anew.
        self.state.log_scale = bool(value)
        self.pipes["hist"].update(data=self.state.histogram_data())
        self.hist = self._histogram_map()
        self.hist_pane.object = self.hist

    def _push_all(self):
        s = self.state
        self.pipes["hist"].send(s.histogram_data())
        self._push_secondary()

    def _push_secondary(self):
        s = self.state
        self.pipes["qq"].send(s.qq_data())
        self.pipes["pp"].send(s.pp_data())
        self.pipes["hazard"].send(s.hazard_data())
        self.pipes["weibull"].send(s.weibull_data())
        self.pipes["trace"].send({k: list(v) for k, v in s.trace.items()})

    def refresh(self, push=True):
        """After a batch: the histogram and the marker now, the other plots and the texts on
        the next tick (``refresh_secondary``), so no single update holds the server long and
        a slider release redraws first."""
        s = self.state
        if push:
            self.pipes["hist"].send(s.histogram_data())
            self._stale = True
        self.marker.object = (f'<span class="ld-redraw" data-version="{s.version}" data-batch="{s.batch}" '
                              f'data-draws="{s.n}">{s.n:,} draws so far</span>')
        if not push:
            self._texts()

    @property
    def stale(self) -> bool:
        return self._stale

    def refresh_secondary(self):
        if self._stale:
            self._stale = False
            self._push_secondary()
            self._texts()

    def _texts(self):
        s = self.state
        self.counters.object = plots.counters_table(s.counters(), columns=3)
        d, p = s.ks()
        n_res = int(s.acc.x.size)
        if s.n:
            verdict = ("no evidence against the model at the 0.001 level" if p >= 1e-3 else
                       "the draws differ from the model (p < 0.001)")
            sub = ("all draws" if n_res == s.n else f"a uniform reservoir of {n_res:,} of the {s.n:,} draws")
            self.summary.object = (
                f"<p>Kolmogorov-Smirnov on {sub}: D = {d:.3g}, p = {p:.3g}: {verdict}.</p>"
                '<p class="ld-small ld-muted">Under the model the p-value wanders uniformly between 0 and 1 as '
                "draws accumulate (so a correct sampler shows p < 0.001 about 1 time in 1,000); a sampler "
                "error drives it to 0. The model cdf is read from a table of exact "
                "values at about 1,500 ages (interpolation error below 1e-5, far under the test's resolution).</p>")
        else:
            self.summary.object = '<p class="ld-muted">No draws yet.</p>'
