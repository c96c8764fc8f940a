"""Step 6, life figures: MTTF, B-lives and R(t) from the draws with their intervals beside the
model's exact values, and a scenario's whole system when it has one."""
from __future__ import annotations

from .html_tables import life_table
from .step_base import Step, text_pane


# ---- 6. life figures -------------------------------------------------------------------------

class LifeStep(Step):
    number = 6
    title = "Life figures"
    blurb = ("MTTF, B-lives and reliability at the mission times, estimated from the draws with confidence "
             "intervals, beside the model's exact values.")

    def __init__(self, state):
        super().__init__(state)
        self.table = text_pane()
        self.note = text_pane()
        self.system = text_pane()
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
        self.table.object = life_table(figs, s.scenario.time_unit)
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
                + life_table(figs, s.scenario.time_unit)
                + f'<p class="ld-small ld-muted">From {figs["n"]:,} system lifetimes drawn from the part samplers '
                  "(series = first failure, parallel = last, standby = sum of lives) beside the exact figures of "
                  "the structure. Parts are assumed independent and switching perfect: real redundancy is often "
                  "weakened by common causes.</p>")
