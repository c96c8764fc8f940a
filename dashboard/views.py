"""The numbered steps of the drawing board page; each only presents a ``DrawingBoard`` and forwards
the user's actions to it (Panel's "DataStore + Views" structure).

Live plots are HoloViews DynamicMaps fed by ``hv.streams.Pipe``; every update a
user action or a batch causes is grouped with ``pn.io.hold`` into one message.
"""
from __future__ import annotations

import html
import io
import logging
import math
import time
import warnings
import tomllib
from pathlib import Path

import holoviews as hv
import numpy as np
import panel as pn
from bokeh.models import PrintfTickFormatter

from lifedraw.engine import ModelError
from lifedraw.engine.cautions import CAUTION
from lifedraw.engine.families import FAMILIES
from lifedraw.engine.scenarios import scenario_files

from . import plots
from . import reliability_plots
from .background import off_loop
from .escaping import css_token, file_stem
from .notices import error_box, show_error
from .state import FORMULA_KINDS, PLANNED_DRAWS, STREAM_LIMIT, TOLERANCES, DrawingBoard
from .uploads import UPLOAD_LIMIT_HTML, check_size, latest_file, upload_widget

log = logging.getLogger("lifedraw.dashboard")

TABLE_CSS = """
table.ld-table { border-collapse: collapse; font-size: 13px; width: 100%; }
table.ld-table th { text-align: left; font-weight: 600; color: #333; border-bottom: 2px solid #d0d4da;
                    padding: 5px 10px 5px 0; white-space: nowrap; }
table.ld-table td { border-bottom: 1px solid #eceef1; padding: 4px 10px 4px 0; vertical-align: top;
                    font-variant-numeric: tabular-nums; }
table.ld-compact { width: auto; }
.ld-muted { color: #6b7280; }
"""
HEAD_CSS = """
h2 { font-size: 19px; margin: 2px 0 4px 0; color: #1f2933; font-weight: 600; }
h2 .ld-num { display: inline-block; min-width: 26px; height: 26px; line-height: 26px; border-radius: 13px;
             background: #1f4e79; color: white; text-align: center; font-size: 14px; margin-right: 10px; }
p { margin: 0 0 4px 0; color: #4b5563; font-size: 14px; }
"""
TEXT_CSS = """
:host { font-size: 14px; color: #1f2933; }
h3 { font-size: 16px; margin: 4px 0 6px 0; }
p { margin: 4px 0; line-height: 1.45; }
pre { background: #f4f6f8; border: 1px solid #e3e6ea; border-radius: 4px; padding: 8px 10px; font-size: 12.5px;
      white-space: pre-wrap; margin: 6px 0; }
.ld-muted { color: #6b7280; }
.ld-small { font-size: 12.5px; }
code { background: #f4f6f8; padding: 0 3px; border-radius: 3px; }
"""
STEP_STYLES = {"background": "#ffffff", "border": "1px solid #dfe3e8", "border-radius": "8px",
               "padding": "10px 18px 14px 18px", "box-shadow": "0 1px 2px rgba(0,0,0,0.04)"}
BATCH_SIZES = {"10,000": 10_000, "20,000": 20_000, "50,000": 50_000, "100,000": 100_000, "200,000": 200_000}
COMPARE_SIZES = {"50,000": 50_000, "100,000": 100_000, "300,000": 300_000}


def _html(text="", css=TEXT_CSS, **kw) -> pn.pane.HTML:
    return pn.pane.HTML(text, stylesheets=[css, TABLE_CSS], sizing_mode=kw.pop("sizing_mode", "stretch_width"),
                        margin=kw.pop("margin", (0, 10)), **kw)


_alert = error_box     # the error box next to a field (escaped HTML, see notices.py)
_show = show_error


def scenario_titles() -> dict[str, str]:
    """Title -> scenario name, read from the files' title lines only (cheap)."""
    out = {}
    for name, source in scenario_files().items():
        try:
            title = tomllib.loads(source.read_text(encoding="utf-8")).get("title", name)
        except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
            title = f"{name} (unreadable)"
        out[f"{title}  [{name}]"] = name
    return out


class Step:
    """A numbered step: heading, one sentence, then controls and outputs."""

    number = 0
    title = ""
    blurb = ""

    def __init__(self, state: DrawingBoard):
        self.state = state

    def heading(self) -> pn.pane.HTML:
        return pn.pane.HTML(f'<h2><span class="ld-num">{self.number}</span>{html.escape(self.title)}</h2>'
                            f"<p>{self.blurb}</p>", stylesheets=[HEAD_CSS], sizing_mode="stretch_width",
                            margin=(0, 10))

    def body(self) -> list:
        raise NotImplementedError

    def panel(self) -> pn.Column:
        return pn.Column(self.heading(), *self.body(), sizing_mode="stretch_width", styles=STEP_STYLES,
                         margin=(8, 0), css_classes=[f"ld-step-{self.number}"], name=self.title)

    def act(self, fn, *args, **kwargs):
        """Run a user action with all the page updates it causes sent as one message."""
        try:
            start = time.perf_counter()
            # freeze: one recomputation of the document's model graph per action,
            # not one per plot that HoloViews updates.
            with pn.io.hold(freeze=True):
                out = fn(*args, **kwargs)
            log.debug("%s took %.0f ms", getattr(fn, "__name__", fn), 1e3 * (time.perf_counter() - start))
            return out
        except Exception:  # the state guards engine errors; this is the last safety net
            log.exception("unexpected error in %s", getattr(fn, "__name__", fn))
            return None


# ---- 1. model --------------------------------------------------------------------------------

class ModelStep(Step):
    number = 1
    title = "Model"
    blurb = ("Pick a scenario, move its parameters, write your own formula or family, "
             "or upload field data; the sampler refits on every change.")

    def __init__(self, state, on_drag=None):
        super().__init__(state)
        s = state
        self.on_drag = on_drag or (lambda: None)
        titles = scenario_titles()
        if s.scenario.name not in titles.values():
            titles[f"{s.scenario.title}  [{s.scenario.name}]"] = s.scenario.name
        self.picker = pn.widgets.Select(name="Scenario", options=titles, value=s.scenario.name, width=640)
        self.picker.param.watch(lambda e: self.act(setattr, s, "scenario_name", e.new), "value")
        self.scenario_error = _alert()
        self.description = _html(css_classes=["ld-description"])
        self.sliders = pn.Column(sizing_mode="stretch_width", margin=0)
        self.slider_widgets: dict[str, pn.widgets.FloatSlider] = {}
        self.parameters_error = _alert()

        self.kind = pn.widgets.RadioButtonGroup(
            name="Model written as", options={"family": "family", "density f(t)": "density",
                                              "hazard h(t)": "hazard", "CDF F(t)": "cdf"},
            value="family", button_type="default", width=420)
        self.family = pn.widgets.Select(name="Family", options={"(choose a family)": "",
                                                                **{f.title: k for k, f in sorted(FAMILIES.items())}},
                                        value="", width=260)
        self.expr = pn.widgets.TextAreaInput(name="Formula in t", value="", height=64,
                                             sizing_mode="stretch_width", placeholder="e.g. t**(k - 1)*exp(-(t/s)**p)")
        self.support = pn.widgets.TextInput(name="Support (from, to)", value="0, inf", width=160)
        self.params = pn.widgets.TextInput(name="Parameters (name = value, ...)", value="",
                                           sizing_mode="stretch_width", placeholder="shape = 2.5, scale = 9000")
        self.apply = pn.widgets.Button(name="Use this model", button_type="primary", width=160)
        self.apply.on_click(lambda e: self.act(self._apply))
        self.kind.param.watch(lambda e: self._kind_changed(), "value")
        self.family.param.watch(lambda e: self._family_changed(), "value")
        self.model_error = _alert()
        self.editor_help = _html(
            '<p class="ld-small ld-muted">A formula is a function of <code>t</code> using + − * / **, '
            "exp, log, sqrt, the functions the formula language lists, <code>when(condition, then, otherwise)</code> "
            "and the parameters you name; a density need not be normalised. Each parameter gets a slider "
            "around its value.</p>")

        self.upload = upload_widget()
        self.upload.param.watch(self._uploaded, "value")
        self.upload_status = _html(css_classes=["ld-upload-status"])
        self.unit = pn.widgets.TextInput(name="Ages recorded in (time unit)", value="", width=170,
                                         placeholder="e.g. hours, days, cycles", css_classes=["ld-upload-unit"])
        self.missions = pn.widgets.TextInput(name="Mission times (ages, comma separated)", value="", width=230,
                                             placeholder="e.g. 8760, 17520", css_classes=["ld-upload-missions"])
        self.use_upload = pn.widgets.Button(name="Use this field data", button_type="primary", width=170,
                                            disabled=True)
        self.use_upload.on_click(self._use_upload)
        self._pending = None
        self.upload_error = _alert()
        self.upload_help = _html(
            '<p class="ld-small ld-muted"><b>Failure times</b>: a header row with <code>time</code> and '
            "<code>suspended</code> (flags 1/0, true/false, yes/no or F/S; without the column every row is a "
            "failure). <b>Binned counts</b>: <code>lower</code>, <code>upper</code>, <code>count</code>, one "
            "contiguous bin per row. Problems are listed by line number. Say in which unit the ages are "
            "recorded and which mission times matter; the data is used once both are set.</p>")
        self.weights = _html(css_classes=["ld-weights"])
        self._prefilling = False
        self._source = None
        s.param.watch(lambda e: self.refresh(), "version")
        s.param.watch(lambda e: self.show_errors(), "errors")
        self.refresh()
        self._kind_changed()

    def body(self):
        # FlexBoxes wrap: at narrow widths the editor's controls and the upload area move onto new
        # lines instead of overlapping.
        editor = pn.Column(
            pn.FlexBox(self.kind, self.family, self.support, margin=0, sizing_mode="stretch_width"),
            self.expr, self.params, pn.Row(self.apply, margin=0), self.editor_help, self.model_error,
            sizing_mode="stretch_width", margin=0)
        upload = pn.Column(pn.pane.HTML("<h3>Field data (CSV)</h3>", stylesheets=[TEXT_CSS], margin=(0, 10)),
                           self.upload, pn.Row(self.unit, self.missions, margin=0), self.use_upload,
                           self.upload_status, self.upload_error, self.upload_help, _html(UPLOAD_LIMIT_HTML),
                           width=440, css_classes=["ld-upload-area"])
        return [
            pn.Row(self.picker, margin=(0, 0)), self.scenario_error,
            self.description,
            pn.pane.HTML("<h3>Parameters</h3>", stylesheets=[TEXT_CSS], margin=(0, 10)),
            self.sliders, self.weights, self.parameters_error,
            pn.FlexBox(
                pn.Column(pn.pane.HTML("<h3>Edit the model</h3>", stylesheets=[TEXT_CSS], margin=(0, 10)),
                          editor, sizing_mode="stretch_width", min_width=520, styles={"flex": "1 1 520px"},
                          css_classes=["ld-editor"]),
                upload, sizing_mode="stretch_width", margin=0),
        ]

    # -- presenting --
    def refresh(self):
        s = self.state
        sc = s.scenario
        story = html.escape(sc.story).replace("\n\n", "</p><p>").replace("\n", " ")
        self.description.object = (
            f"<h3>{html.escape(sc.title)}</h3><p>{story}</p>"
            f"<pre>{html.escape(s.target.describe())}</pre>"
            f'<p class="ld-small ld-muted">Ages in {html.escape(sc.time_unit)}. Mission times: '
            f'{", ".join(plots.fmt(t) for t in sc.mission_times) or "none"}.</p>')
        self._prefill_editor()          # the editor always shows the model that runs now
        self.weights.object = self._weights_html()
        source = (sc.name, tuple(sc.parameters), sc.model.get("kind"))
        if source != self._source:
            self._source = source
            self._build_sliders()
            if sc.name not in self.picker.options.values():
                self.picker.options = {**self.picker.options, f"{sc.title}  [{sc.name}]": sc.name}
            if self.picker.value != sc.name:
                self.picker.value = sc.name

    def _build_sliders(self):
        sc = self.state.scenario
        widgets = {}
        for name, p in sc.parameters.items():
            fmt = "%.3g" if (abs(p.high) < 0.01 or abs(p.high) >= 1e5 or p.step < 1e-3) else "%.4g"
            w = pn.widgets.FloatSlider(name=p.label or name, start=p.low, end=p.high, step=p.step, value=p.value,
                                       format=PrintfTickFormatter(format=fmt), width=300, margin=(4, 12),
                                       css_classes=[css_token(name, "ld-slider")])
            w.param.watch(lambda e, n=name: self.act(self.state.set_value, n, e.new), "value_throttled")
            w.param.watch(lambda e: self.on_drag(), "value")     # arrives while the handle moves
            widgets[name] = w
        self.slider_widgets = widgets
        if widgets:
            self.sliders[:] = [pn.FlexBox(*widgets.values(), sizing_mode="stretch_width", margin=0)]
        else:
            self.sliders[:] = [_html('<p class="ld-muted ld-small">This model has no parameters to vary '
                                     "(field data is used as recorded).</p>")]

    def _weights_html(self) -> str:
        """A mixture's weights as they are used: the sliders' values rescaled to add up to 1."""
        rows = self.state.effective_weights()
        if not rows:
            return ""
        total = sum(r["set"] for r in rows)
        items = "; ".join(f"{html.escape(r['label'])}: set {r['set']:.3g} → <b>{100 * r['used']:.1f} %</b>"
                          for r in rows)
        return (f'<p class="ld-small">Mixture weights as used (the set values add up to {total:.3g} and are '
                f"rescaled to add up to 1): {items}.</p>")

    def _prefill_editor(self):
        self._prefilling = True
        try:
            self._prefill()
        finally:
            self._prefilling = False

    def _prefill(self):
        s = self.state
        model = s.scenario.model
        kind = model.get("kind")
        if kind in FORMULA_KINDS:
            self.kind.value = kind
            self.expr.value = str(model.get("expr", ""))
            lo, hi = model.get("support", [0, "inf"])
            self.support.value = f"{lo}, {hi}"
            self.params.value = ", ".join(f"{k} = {v:g}" for k, v in s.values.items())
        elif kind == "family":
            self.kind.value = "family"
            self.family.value = s.target.fam.name
            self.params.value = ", ".join(f"{k} = {v:g}" for k, v in s.target.params.items()
                                          if not (k == "location" and v == 0))
        else:
            # A mixture, competing modes, field data...: no single family or formula shows it, so the
            # editor starts empty rather than showing a model unrelated to the one on screen.
            self.kind.value = "family"
            self.family.value = ""
            self.expr.value = ""
            self.params.value = ""

    def _kind_changed(self):
        family = self.kind.value == "family"
        self.family.visible = family
        self.expr.visible = not family
        self.support.visible = not family

    def _family_changed(self):
        if self._prefilling:
            return
        if not self.family.value:
            self.params.value = ""
            return
        fam = FAMILIES[self.family.value]
        if self.state.scenario.model.get("kind") == "family" and self.state.target.fam.name == fam.name:
            return
        scale = float(self.state.target.quantile(0.5))
        guess = {"shape": 1.5, "scale": scale, "mu": math.log(max(scale, 1e-300)), "sigma": 0.5,
                 "mean": scale, "sd": scale / 4, "location": 0.0}
        self.params.value = ", ".join(f"{p.name} = {guess.get(p.name, 1.0):.4g}" for p in fam.params
                                      if p.default is None)

    def show_errors(self):
        e = self.state.errors
        _show(self.scenario_error, e.get("scenario"))
        _show(self.parameters_error, e.get("parameters"))
        _show(self.model_error, e.get("model"))
        _show(self.upload_error, e.get("upload"))

    # -- acting --
    def _apply(self):
        if self.kind.value == "family":
            self.state.apply_family(self.family.value, self.params.value)
        else:
            self.state.apply_formula(self.kind.value, self.expr.value, self.support.value, self.params.value)

    async def _uploaded(self, event):
        """A file arrived: keep it, and use it at once if its time unit is already given."""
        self._pending = latest_file(self.upload.value)
        self.use_upload.disabled = self._pending is None
        if self._pending is not None and self.unit.value.strip():
            await self._use_upload()

    async def _use_upload(self, event=None):
        """Parse and fit the uploaded file in a worker thread (a large file takes seconds), with the
        time unit and mission times typed beside it, then adopt it."""
        if self._pending is None:
            return
        name, data = self._pending
        s = self.state
        unit, missions = self.unit.value, self.missions.value
        log.info("upload %s received (%d bytes)", file_stem(name), len(data))
        self.upload_status.object = (f'<p class="ld-muted">Reading {html.escape(name)} '
                                     f"({len(data) / 1e6:.1f} MB)…</p>")

        def prepare():
            check_size(data, name)
            sc = s.field_data_scenario(data, name, unit, missions)
            return sc, s.fit_model(sc, "auto")

        result = await off_loop(prepare)
        log.info("upload %s processed", file_stem(name))
        self.upload_status.object = ""
        if isinstance(result, Exception):
            self.act(s.file_error, "upload", result)
        else:
            self.act(s.adopt_field_data, *result)


# ---- 2. generator ----------------------------------------------------------------------------

class GeneratorStep(Step):
    number = 2
    title = "Generator"
    blurb = ("Choose the sampling method (auto picks one and says why), its tolerance, the batch size and "
             "the seed; start, pause or reset the live stream.")

    def __init__(self, state):
        super().__init__(state)
        s = state
        self.method = pn.widgets.Select(name="Method", options=list(s.param.method.objects), value=s.method,
                                        width=200)
        self.tolerance = pn.widgets.Select(name="u-error tolerance", options={f"{t:g}": t for t in TOLERANCES},
                                           value=s.tolerance, width=140)
        batch_options = dict(BATCH_SIZES)
        if s.batch_size not in batch_options.values():
            batch_options[f"{s.batch_size:,}"] = s.batch_size
        self.batch = pn.widgets.Select(name="Batch size", options=batch_options, value=s.batch_size, width=120)
        self.seed = pn.widgets.IntInput(name="Seed", value=int(s.seed), start=0, width=140)
        self.stop_at = pn.widgets.IntInput(name="Stop after (draws)", value=int(s.stop_at), start=1_000,
                                           end=STREAM_LIMIT, step=10_000, width=160)
        self.availability = _html(css_classes=["ld-method-availability"])
        self.start = pn.widgets.Button(name="▶ Start", button_type="primary", width=100)
        self.pause = pn.widgets.Button(name="❚❚ Pause", button_type="default", width=100)
        self.reset = pn.widgets.Button(name="↺ Reset", button_type="default", width=100)
        self.status = _html()
        self.method_error = _alert()
        self.run_error = _alert()
        self.method.param.watch(lambda e: self.act(setattr, s, "method", e.new), "value")
        self.tolerance.param.watch(lambda e: self.act(setattr, s, "tolerance", e.new), "value")
        self.batch.param.watch(lambda e: self.act(setattr, s, "batch_size", int(e.new)), "value")
        self.seed.param.watch(lambda e: self.act(self._set_seed, e.new), "value")
        self.stop_at.param.watch(lambda e: self.act(self._set_stop, e.new), "value")
        self.start.on_click(lambda e: self.act(s.start))
        self.pause.on_click(lambda e: self.act(s.pause))
        self.reset.on_click(lambda e: self.act(s.reset))
        s.param.watch(lambda *events: self.sync(), ["version", "running", "method", "tolerance", "seed", "stop_at"])
        s.param.watch(lambda e: self.refresh_status(), "batch")
        s.param.watch(lambda e: self.show_errors(), "errors")
        self.sync()

    def body(self):
        return [pn.FlexBox(self.method, self.tolerance, self.batch, self.seed, self.stop_at, margin=0,
                           sizing_mode="stretch_width"),
                self.availability, self.method_error,
                pn.Row(self.start, self.pause, self.reset, margin=(4, 0)),
                self.status, self.run_error]

    def _set_seed(self, value):
        try:
            self.state.seed = int(value)
        except (TypeError, ValueError):
            self.state.file_error("run", ModelError("seed", f"must be a whole number >= 0, got {value!r}"))

    def _set_stop(self, value):
        try:
            self.state.stop_at = int(value)
            self.state.clear_error("run")
        except (TypeError, ValueError):
            self.state.file_error("run", ModelError(
                "stop after", f"must be a whole number from 1,000 to 50,000,000, got {value!r}"))

    def sync(self):
        s = self.state
        self._offer_methods()
        for w, v in ((self.method, s.method), (self.tolerance, s.tolerance), (self.seed, int(s.seed)),
                     (self.stop_at, int(s.stop_at))):
            if w.value != v:
                w.value = v
        self.refresh_status()

    def _offer_methods(self):
        """Offer only the methods that can serve the current model; grey the others, with their reason."""
        s = self.state
        reasons = s.method_availability()
        refused = [m for m, why in reasons.items() if why]
        if self.method.disabled_options != refused:
            self.method.disabled_options = refused
        if refused:
            items = "".join(f"<li><b>{html.escape(m)}</b>: {html.escape(reasons[m])}</li>" for m in refused)
            self.availability.object = (f'<div class="ld-small ld-muted">Not offered for this model:'
                                        f'<ul style="margin:2px 0 0 0">{items}</ul></div>')
        else:
            self.availability.object = '<p class="ld-small ld-muted">Every method can serve this model.</p>'

    def refresh_status(self):
        s = self.state
        st = s.sampler.stats
        variant = f" ({st['variant']})" if st.get("variant") else ""
        state_word = ("streaming" if s.running else ("finished" if s.done else ("paused" if s.n else "ready")))
        self.start.disabled = s.running
        self.pause.disabled = not s.running
        self.status.object = (
            f"<p><b>{html.escape(s.sampler.method)}{html.escape(variant)}</b>: {html.escape(s.sampler.reason)}."
            f"</p><p class=\"ld-small ld-muted\">{html.escape(type(s.sampler).reference)}</p>"
            f'<p><span class="ld-run-state">{state_word}</span> · <b class="ld-draw-count">{s.n:,} draws</b> · '
            f"{'draws until Pause' if s.stop_at >= STREAM_LIMIT else f'stops at {s.stop_at:,} draws'} · "
            f"batches of {s.batch_size:,} · set-up {1e3 * st['setup_seconds']:.1f} ms · "
            f"last refit {s.last_refit_ms:.0f} ms</p>")

    def show_errors(self):
        _show(self.method_error, self.state.errors.get("method"))
        _show(self.run_error, self.state.errors.get("run"))


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
        self.counters = _html()
        self.summary = _html()
        self.marker = _html(css_classes=["ld-marker"])
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


# ---- 4. geometry -----------------------------------------------------------------------------

class GeometryStep(Step):
    number = 4
    title = "Method geometry"
    blurb = "How the chosen method turns uniform numbers into lifetimes, drawn from the sampler's own tables."

    def __init__(self, state):
        super().__init__(state)
        self.caption = _html()
        self.plots = pn.FlexBox(sizing_mode="stretch_width", margin=0)
        self._shown = None
        self._layout = None
        self._pipes: list[hv.streams.Pipe] = []

    def body(self):
        return [self.caption, self.plots]

    @property
    def stale(self) -> bool:
        return (self.state.version, id(self.state.sampler)) != self._shown

    def refresh(self):
        """Redraw after a refit: in place through the Pipes while the pictures keep their
        structure (same method, same layers), as new plots when it changes."""
        s = self.state
        key = (s.version, id(s.sampler))
        if key == self._shown:
            return
        self._shown = key
        geom = s.geometry()
        fallback = None
        if s.acc is not None and s.acc.x.size and not s.target.atoms.size:
            x = np.linspace(s.acc.edges[0], s.view_right, 400)
            fallback = {"x": x, "pdf": s.target.pdf(x), "draws": s.acc.x[:50_000]}
        view = (float(s.acc.edges[0]), float(s.view_right)) if s.acc is not None else None
        elements = plots.geometry_plots(geom, s.scenario.time_unit, fallback=fallback, view=view)
        self.caption.object = (f'<p><b class="ld-geometry-method">{html.escape(s.sampler.method)}</b> — '
                               f"{html.escape(type(s.sampler).reference)}</p>")
        layout = (s.sampler.method, tuple(_signature(e) for e in elements))
        if layout == self._layout:
            for pipe, element in zip(self._pipes, elements):
                pipe.send(element)
            return
        self._layout = layout
        self._pipes = [hv.streams.Pipe(data=e) for e in elements]
        wide = len(elements) == 1
        panes = []
        for pipe, e in zip(self._pipes, elements):
            dm = hv.DynamicMap(lambda data: data, streams=[pipe]).opts(framewise=True, axiswise=True)
            height = e.opts.get().kwargs.get("height", 300) + 10
            panes.append(pn.pane.HoloViews(dm, sizing_mode="stretch_width" if wide else "fixed",
                                           width=None if wide else 540, height=height, margin=(0, 6)))
        self.plots[:] = panes


def _signature(element) -> tuple:
    """What must stay the same for a DynamicMap to redraw an element in place."""
    if isinstance(element, hv.Overlay):
        return ("Overlay", tuple((type(e).__name__, e.label) for e in element))
    return (type(element).__name__,)


# ---- 5. comparison ---------------------------------------------------------------------------

class ComparisonStep(Step):
    number = 5
    title = "Method comparison"
    blurb = ("Every method that can serve this model, measured now on this machine, and the one to use for the "
             "number of draws you mean to take: set-up plus cost per draw, accuracy, memory. It takes a few seconds.")

    def __init__(self, state):
        super().__init__(state)
        self.size = pn.widgets.Select(name="Draws per method", options=COMPARE_SIZES, value=100_000, width=150)
        self.run = pn.widgets.Button(name="Measure all methods", button_type="primary", width=180,
                                     margin=(22, 10, 0, 10))
        self.run.on_click(self._run)
        self.planned = pn.widgets.Select(name="Draws you mean to take",
                                         options={_planned_label(n): n for n in PLANNED_DRAWS},
                                         value=int(state.planned_draws), width=170)
        self.planned.param.watch(lambda e: self.act(self._set_planned, e.new), "value")
        self.decision = _html(css_classes=["ld-decision"])
        self.note = _html()
        self.error = _alert()
        self.table = _html()
        self.bars = pn.FlexBox(sizing_mode="stretch_width", margin=0)
        state.param.watch(lambda e: self.refresh(), "comparison")
        state.param.watch(lambda e: _show(self.error, state.errors.get("comparison")), "errors")
        self.refresh()

    def body(self):
        return [pn.Row(self.size, self.planned, self.run, margin=0), self.error, self.decision, self.note,
                self.table, self.bars]

    def _set_planned(self, value):
        self.state.planned_draws = int(value)
        self.refresh()

    async def _run(self, event):
        s = self.state
        was_running = s.running
        self.run.loading = True
        self.note.object = '<p class="ld-muted">Measuring…</p>'
        s.pause()   # timings of one process alone, not sharing the core with the live stream
        try:
            n, version = int(self.size.value), s.version
            target, seed, tol = s.target, int(s.seed), float(s.tolerance)
            result = await off_loop(_measure, target, n, seed, tol)
            with pn.io.hold(freeze=True):
                if s.version == version:
                    s.set_comparison(result, n)
                else:
                    self.note.object = ('<p class="ld-muted">The model changed while the methods were being '
                                        "measured; press <b>Measure all methods</b> again.</p>")
        except Exception:
            log.exception("unexpected error in the method comparison")
        finally:
            self.run.loading = False
            if was_running and not s.done:
                s.running = True

    def refresh(self):
        s = self.state
        rows = [r.to_dict() for r in s.comparison]
        if not rows:
            self.note.object = ('<p class="ld-muted">Not measured yet for this model: press '
                                "<b>Measure all methods</b>.</p>")
            self.decision.object = ""
            self.table.object = ""
            if self.bars.objects:
                self.bars[:] = []
            return
        self.note.object = f'<p class="ld-small ld-muted">{html.escape(s.comparison_note)}.</p>'
        decision = s.decision()
        self.decision.object = f'<p class="ld-verdict"><b>{html.escape(decision.sentence)}</b></p>' if decision else ""
        self.table.object = plots.comparison_table(rows)
        self.bars[:] = [pn.pane.HoloViews(b, width=390, height=250, margin=(0, 6))
                        for b in plots.comparison_charts(rows, int(s.planned_draws), width=380, height=240)]


def _planned_label(n: int) -> str:
    """10,000 / 100,000 / 1 million / 1 billion."""
    for word, size in (("billion", 10**9), ("million", 10**6)):
        if n >= size:
            return f"{n / size:g} {word}"
    return f"{n:,}"


def _measure(target, n, seed, tol):
    """Run in a worker thread: measure, and hand back rows or the exception."""
    from lifedraw.engine.compare import compare_methods
    try:
        return compare_methods(target, n=n, rng=seed, tolerance=tol)
    except Exception as err:  # reported on the page by the state's guard
        return err


# ---- 6. life figures -------------------------------------------------------------------------

class LifeStep(Step):
    number = 6
    title = "Life figures"
    blurb = ("MTTF, B-lives and reliability at the mission times, estimated from the draws with confidence "
             "intervals, beside the model's exact values.")

    def __init__(self, state):
        super().__init__(state)
        self.table = _html()
        self.note = _html()
        self.system = _html()
        self._shown = None

    def body(self):
        return [self.table, self.note, self.system]

    @property
    def stale(self) -> bool:
        return (self.state.version, self.state.batch) != self._shown

    def refresh(self):
        s = self.state
        key = (s.version, s.batch)
        if key == self._shown:
            return
        self._shown = key
        figs = s.life_figures()
        if figs is None:
            return
        self.table.object = plots.life_table(figs, s.scenario.time_unit)
        if figs["n"]:
            src = ("all draws" if figs["n"] == figs["total"] else
                   f"a uniform reservoir of {figs['n']:,} of the {figs['total']:,} draws")
            self.note.object = (f'<p class="ld-small ld-muted">From {src}. MTTF interval: normal theory; '
                                "B-lives: distribution-free order-statistic intervals; R(t): Wilson score "
                                "intervals.</p>")
        else:
            self.note.object = '<p class="ld-muted">No draws yet: the model\'s exact values are shown.</p>'
        self.system.object = self._system_html(s)

    @staticmethod
    def _system_html(s) -> str:
        """The scenario's system (if it has one): figures of the whole structure."""
        figs = s.system_figures()
        if not figs:
            return ""
        import html as _h
        return (f'<h4 style="margin:14px 0 4px 0">The whole system: {_h.escape(figs["name"])}</h4>'
                f'<pre class="ld-small" style="white-space:pre-wrap">{_h.escape(figs["describe"])}</pre>'
                + plots.life_table(figs, s.scenario.time_unit)
                + f'<p class="ld-small ld-muted">From {figs["n"]:,} system lifetimes drawn from the part samplers '
                  "(series = first failure, parallel = last, standby = sum of lives) beside the exact figures of "
                  "the structure. Parts are assumed independent and switching perfect: real redundancy is often "
                  "weakened by common causes.</p>")


# ---- 8. report (7 is the fleet step, fleet_view.py) -------------------------------------------------------------------------------

class ReportStep(Step):
    number = 8
    title = "Report"
    blurb = ("Save this snapshot as a self-contained HTML report (it opens offline), or save the current "
             "settings as a scenario file.")

    def __init__(self, state, report_dir: Path):
        super().__init__(state)
        self.report_dir = Path(report_dir)
        self.write = pn.widgets.Button(name="Write HTML report", button_type="primary", width=180)
        self.write.on_click(self._write)
        self.path = _html(css_classes=["ld-report-path"])
        self.error = _alert()
        self.download = pn.widgets.FileDownload(label="Download the report", visible=False, width=220,
                                                button_type="success")
        self.toml = pn.widgets.FileDownload(callback=self._toml, filename=f"{file_stem(state.scenario.name)}.toml",
                                            label="Download scenario file (.toml)", width=260,
                                            button_type="default")
        state.param.watch(lambda e: self._renamed(), "version")
        state.param.watch(lambda e: _show(self.error, state.errors.get("report")), "errors")

    def body(self):
        return [pn.Row(self.write, self.download, self.toml, margin=0), self.path, self.error]

    def _renamed(self):
        self.toml.filename = f"{file_stem(self.state.scenario.name)}.toml"

    def _toml(self):
        return io.StringIO(self.state.scenario_toml())

    async def _write(self, event):
        from .report import default_report_path, write_report
        s = self.state
        was_running = s.running
        s.pause()
        self.write.loading = True
        self.path.object = ('<p class="ld-muted">Writing the report (fit, draws, checks and a method '
                            "comparison take a few seconds)…</p>")
        try:
            scenario = s.current_scenario()
            path = default_report_path(self.report_dir, scenario)
            rows = list(s.comparison) or None
            result = await off_loop(_write_report, write_report, scenario, path, rows,
                                  int(s.planned_draws))
            with pn.io.hold(freeze=True):
                if isinstance(result, Exception):
                    s.file_error("report", result)
                    self.path.object = ""
                else:
                    s.clear_error("report")
                    self.path.object = (f'<p>Written: <code class="ld-path">{html.escape(str(result))}</code> '
                                        f"({result.stat().st_size / 1e6:.1f} MB)</p>")
                    self.download.file = str(result)
                    self.download.filename = result.name
                    self.download.visible = True
        except Exception:
            log.exception("unexpected error while writing the report")
            self.path.object = ""
        finally:
            self.write.loading = False
            if was_running and not s.done:
                s.running = True


def _write_report(write_report, scenario, path, rows, planned):
    try:
        return write_report(scenario, path, comparison=rows, planned_draws=planned)
    except Exception as err:
        return err


# ---- the page --------------------------------------------------------------------------------

def caution_banner() -> pn.pane.Alert:
    return pn.pane.Alert(f"<b>Caution.</b> {html.escape(CAUTION)}", alert_type="warning",
                         sizing_mode="stretch_width", margin=(6, 0), css_classes=["ld-caution"])


# ---- renamed names ------------------------------------------------------------------------------

_RENAMED = {"Cell": "Step", **{f"{k}Cell": f"{k}Step" for k in
            ("Model", "Generator", "LiveCheck", "Geometry", "Comparison", "Life", "Report")}}


def __getattr__(name: str):
    """The sections were once called cells (``ModelCell``, ...): the old names still work for one
    release, with a warning."""
    if name in _RENAMED:
        warnings.warn(f"lifedraw.dashboard.views.{name} is deprecated; use {_RENAMED[name]}",
                      DeprecationWarning, stacklevel=2)
        return globals()[_RENAMED[name]]
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
