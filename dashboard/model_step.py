"""Step 1, the model: scenario picker, parameter sliders, the model editor (family or formula)
and the upload area for field data; it presents DrawingBoard and forwards the user's actions."""
from __future__ import annotations

import html
import math

import panel as pn
from bokeh.models import PrintfTickFormatter

from lifedraw.engine.families import FAMILIES

from . import html_tables
from .background import off_loop
from .escaping import css_token, file_stem
from .notices import error_box, show_error
from .prompt_slider import PromptSlider
from .state import FORMULA_KINDS
from .step_base import Step, TEXT_CSS, log, scenario_titles, text_pane
from .uploads import UPLOAD_LIMIT_HTML, check_size, latest_file, upload_widget


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
        self.scenario_error = error_box()
        self.description = text_pane(css_classes=["ld-description"])
        self.sliders = pn.Column(sizing_mode="stretch_width", margin=0)
        self.slider_widgets: dict[str, pn.widgets.FloatSlider] = {}
        self.parameters_error = error_box()

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
        self.model_error = error_box()
        self.editor_help = text_pane(
            '<p class="ld-small ld-muted">A formula is a function of <code>t</code> using + − * / **, '
            "exp, log, sqrt, the functions the formula language lists, <code>when(condition, then, otherwise)</code> "
            "and the parameters you name; a density need not be normalised. Each parameter gets a slider "
            "around its value.</p>")

        self.upload = upload_widget()
        self.upload.param.watch(self._uploaded, "value")
        self.upload_status = text_pane(css_classes=["ld-upload-status"])
        self.unit = pn.widgets.TextInput(name="Ages recorded in (time unit)", value="", width=170,
                                         placeholder="e.g. hours, days, cycles", css_classes=["ld-upload-unit"])
        self.missions = pn.widgets.TextInput(name="Mission times (ages, comma separated)", value="", width=230,
                                             placeholder="e.g. 8760, 17520", css_classes=["ld-upload-missions"])
        self.use_upload = pn.widgets.Button(name="Use this field data", button_type="primary", width=170,
                                            disabled=True)
        self.use_upload.on_click(self._use_upload)
        self._pending = None
        self.upload_error = error_box()
        self.upload_help = text_pane(
            '<p class="ld-small ld-muted"><b>Failure times</b>: a header row with <code>time</code> and '
            "<code>suspended</code> (flags 1/0, true/false, yes/no or F/S; without the column every row is a "
            "failure). <b>Binned counts</b>: <code>lower</code>, <code>upper</code>, <code>count</code>, one "
            "contiguous bin per row. Problems are listed by line number. Say in which unit the ages are "
            "recorded and which mission times matter; the data is used once both are set.</p>")
        self.weights = text_pane(css_classes=["ld-weights"])
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
                           self.upload_status, self.upload_error, self.upload_help, text_pane(UPLOAD_LIMIT_HTML),
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
            f'{", ".join(html_tables.fmt(t) for t in sc.mission_times) or "none"}.</p>')
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
            w = PromptSlider(name=p.label or name, start=p.low, end=p.high, step=p.step, value=p.value,
                                       format=PrintfTickFormatter(format=fmt), width=300, margin=(4, 12),
                                       css_classes=[css_token(name, "ld-slider")])
            # A release refits and redraws the live check, whose plots copy plain values onto the page
            # (MirroredPlot): no recomputation of the document's model graph is needed after it.
            w.param.watch(lambda e, n=name: self.act(self.state.set_value, n, e.new, freeze=False),
                          "value_throttled")
            w.param.watch(lambda e: self.on_drag(), "value")     # arrives while the handle moves
            widgets[name] = w
        self.slider_widgets = widgets
        if widgets:
            self.sliders[:] = [pn.FlexBox(*widgets.values(), sizing_mode="stretch_width", margin=0)]
        else:
            self.sliders[:] = [text_pane('<p class="ld-muted ld-small">This model has no parameters to vary '
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
        show_error(self.scenario_error, e.get("scenario"))
        show_error(self.parameters_error, e.get("parameters"))
        show_error(self.model_error, e.get("model"))
        show_error(self.upload_error, e.get("upload"))

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
