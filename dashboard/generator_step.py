"""Step 2, the generator: method (only those that can serve the model), tolerance, batch size,
seed, stream stop; Start streams until Pause; the status line counts draws."""
from __future__ import annotations

import html

import panel as pn

from lifedraw.engine import ModelError

from .notices import error_box, show_error
from .state import STREAM_LIMIT, TOLERANCES
from .step_base import Step, text_pane


BATCH_SIZES = {"10,000": 10_000, "20,000": 20_000, "50,000": 50_000, "100,000": 100_000, "200,000": 200_000}


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
        self.availability = text_pane(css_classes=["ld-method-availability"])
        self.start = pn.widgets.Button(name="▶ Start", button_type="primary", width=100)
        self.pause = pn.widgets.Button(name="❚❚ Pause", button_type="default", width=100)
        self.reset = pn.widgets.Button(name="↺ Reset", button_type="default", width=100)
        self.status = text_pane()
        self.method_error = error_box()
        self.run_error = error_box()
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
        show_error(self.method_error, self.state.errors.get("method"))
        show_error(self.run_error, self.state.errors.get("run"))
