"""Step 7, the report: writes the standalone HTML report in a worker thread and offers it and
the scenario file (.toml) as downloads."""
from __future__ import annotations

import html
import io
from pathlib import Path

import panel as pn

from .background import off_loop
from .escaping import file_stem
from .notices import error_box, show_error
from .step_base import Step, log, text_pane


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
        self.path = text_pane(css_classes=["ld-report-path"])
        self.error = error_box()
        self.download = pn.widgets.FileDownload(label="Download the report", visible=False, width=220,
                                                button_type="success")
        self.toml = pn.widgets.FileDownload(callback=self._toml, filename=f"{file_stem(state.scenario.name)}.toml",
                                            label="Download scenario file (.toml)", width=260,
                                            button_type="default")
        state.param.watch(lambda e: self._renamed(), "version")
        state.param.watch(lambda e: show_error(self.error, state.errors.get("report")), "errors")

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
