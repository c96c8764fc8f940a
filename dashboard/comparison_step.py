"""Step 5, the method comparison: every method measured in a worker thread (engine.compare) and
the verdict for the number of draws the user means to take."""
from __future__ import annotations

import html

import panel as pn

from . import plots
from .html_tables import comparison_table
from .background import off_loop
from .notices import error_box, show_error
from .state import PLANNED_DRAWS
from .step_base import Step, log, text_pane


COMPARE_SIZES = {"50,000": 50_000, "100,000": 100_000, "300,000": 300_000}


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
        self.decision = text_pane(css_classes=["ld-decision"])
        self.note = text_pane()
        self.error = error_box()
        self.table = text_pane()
        self.bars = pn.FlexBox(sizing_mode="stretch_width", margin=0)
        state.param.watch(lambda e: self.refresh(), "comparison")
        state.param.watch(lambda e: show_error(self.error, state.errors.get("comparison")), "errors")
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
        self.table.object = comparison_table(rows)
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
