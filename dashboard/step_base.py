"""What every numbered step of the page shares: the Step base class (heading, one sentence,
controls), the text and error panes, the page's CSS and the caution banner (Panel panes)."""
from __future__ import annotations

import html
import logging
import time
import tomllib

import panel as pn

from lifedraw.engine.cautions import CAUTION
from lifedraw.engine.scenarios import scenario_files

from .state import DrawingBoard


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


def text_pane(text="", css=TEXT_CSS, **kw) -> pn.pane.HTML:
    return pn.pane.HTML(text, stylesheets=[css, TABLE_CSS], sizing_mode=kw.pop("sizing_mode", "stretch_width"),
                        margin=kw.pop("margin", (0, 10)), **kw)


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

    def act(self, fn, *args, freeze: bool = True, **kwargs):
        """Run a user action with all the page updates it causes sent as one message.

        ``freeze``: hold the document's model graph until the end, so that the HoloViews plots the action
        redraws inside the page cost one recomputation of the graph, not one each (it runs after the
        message has gone out). An action that redraws no such plot passes False and skips it."""
        try:
            start = time.perf_counter()
            with pn.io.hold(freeze=freeze):
                out = fn(*args, **kwargs)
            log.debug("%s took %.0f ms", getattr(fn, "__name__", fn), 1e3 * (time.perf_counter() - start))
            return out
        except Exception:  # the state guards engine errors; this is the last safety net
            log.exception("unexpected error in %s", getattr(fn, "__name__", fn))
            return None


# ---- the page --------------------------------------------------------------------------------

def caution_banner() -> pn.pane.Alert:
    return pn.pane.Alert(f"<b>Caution.</b> {html.escape(CAUTION)}", alert_type="warning",
                         sizing_mode="stretch_width", margin=(6, 0), css_classes=["ld-caution"])
