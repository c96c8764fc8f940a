"""Step 3, the live check: histogram, hazard rate and cumulative hazard, Weibull probability
plot, QQ/PP, KS and acceptance traces; each live plot is a MirroredPlot (new frames drawn off the
page by HoloViews, their values copied onto the shown Bokeh plot)."""
from __future__ import annotations

import panel as pn

from . import plots
from . import reliability_plots
from .html_tables import counters_table
from .mirrored_plot import MirroredPlot
from .step_base import Step, TEXT_CSS, text_pane

#: Each picture of the step, drawn from plain data (shared with the report).
PICTURES = {"hist": plots.density_histogram, "hazard": reliability_plots.hazard_plot,
            "cumulative": reliability_plots.cumulative_hazard_plot, "weibull": reliability_plots.weibull_plot,
            "qq": plots.qq_plot, "pp": plots.pp_plot, "ks": lambda data: plots.trace_plot(data, "ks_p"),
            "acceptance": lambda data: plots.trace_plot(data, "acceptance")}
#: The secondary pictures in the pieces that ``refresh_secondary`` redraws one at a time (traces with the texts).
PIECE_PICTURES = {"qq": ("qq", "pp"), "hazard": ("hazard", "cumulative"), "weibull": ("weibull",),
                  "trace": ("ks", "acceptance")}
SECONDARY_PIECES = tuple(PIECE_PICTURES)


# ---- 3. live check ---------------------------------------------------------------------------

def picture_data(state, key: str) -> dict:
    """The plain data the live picture ``key`` (a key of PICTURES) shows, read from ``state``."""
    if key == "hist":
        return state.histogram_data()
    if key in ("hazard", "cumulative"):
        return state.hazard_data()
    if key == "weibull":
        return state.weibull_data()
    if key == "qq":
        return state.qq_data()
    if key == "pp":
        return state.pp_data()
    return {k: list(v) for k, v in state.trace.items()}


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
        self.mirrors = {}
        self.panes = {}
        for key, height in (("hist", 330), ("hazard", 300), ("cumulative", 300), ("weibull", 340), ("qq", 290),
                            ("pp", 290), ("ks", 250), ("acceptance", 250)):
            self.mirrors[key] = MirroredPlot(PICTURES[key], picture_data(self.state, key))
            self.panes[key] = pn.pane.Bokeh(self.mirrors[key].figure, sizing_mode="stretch_width", height=height,
                                            margin=(0, 6))
        self.counters = text_pane()
        self.summary = text_pane()
        self.marker = text_pane(css_classes=["ld-marker"])
        self._due: list[str] = []
        s.param.watch(lambda e: self.refresh(), "batch")
        self.refresh(push=False)

    def _draw(self, key: str) -> None:
        """Show the latest data in one picture (its values copied onto the page, see MirroredPlot)."""
        mirror = self.mirrors[key]
        mirror.show(picture_data(self.state, key))
        if mirror.take_replaced():
            self.panes[key].object = mirror.figure

    def _redraw_afresh(self, key: str) -> None:
        # A Bokeh axis cannot switch between linear and log in place: the picture is made anew.
        self.mirrors[key] = MirroredPlot(PICTURES[key], picture_data(self.state, key))
        self.panes[key].object = self.mirrors[key].figure

    def _set_hazard_log(self, value):
        self.state.hazard_log = bool(value)
        self._redraw_afresh("hazard")
        self._redraw_afresh("cumulative")

    def body(self):
        p = self.panes
        return [pn.Row(self.log, self.marker, margin=0),
                p["hist"],
                self.hazard_log,
                pn.Row(p["hazard"], p["cumulative"], sizing_mode="stretch_width", margin=0),
                p["weibull"],
                pn.Row(p["qq"], p["pp"], sizing_mode="stretch_width", margin=0),
                pn.Row(p["ks"], p["acceptance"], sizing_mode="stretch_width", margin=0),
                pn.pane.HTML("<h3>What the check says</h3>", stylesheets=[TEXT_CSS], margin=(0, 10)),
                self.summary,
                pn.pane.HTML("<h3>Sampler counters</h3>", stylesheets=[TEXT_CSS], margin=(0, 10)),
                self.counters]

    def _set_log(self, value):
        self.state.log_scale = bool(value)
        self._redraw_afresh("hist")

    def refresh(self, push=True):
        """After a batch: the histogram and the marker now; the other plots and the texts later, one
        piece per call of ``refresh_secondary``, so no single update holds the server long and a slider
        release waits at most for one piece."""
        s = self.state
        if push:
            self._draw("hist")
            # Every piece is due again; those still waiting from the last batch keep their place in front,
            # so while the stream runs each picture gets its turn.
            self._due += [piece for piece in SECONDARY_PIECES if piece not in self._due]
        self.marker.object = (f'<span class="ld-redraw" data-version="{s.version}" data-batch="{s.batch}" '
                              f'data-draws="{s.n}">{s.n:,} draws so far</span>')
        if not push:
            self._texts()

    @property
    def stale(self) -> bool:
        return bool(self._due)

    def refresh_secondary(self):
        """Redraw the next due piece of the secondary pictures (QQ and PP, hazard, Weibull plot, traces
        and texts) with the latest data."""
        if self._due:
            piece = self._due.pop(0)
            for key in PIECE_PICTURES[piece]:
                self._draw(key)
            if piece == "trace":
                self._texts()

    def _texts(self):
        s = self.state
        self.counters.object = counters_table(s.counters(), columns=3)
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
