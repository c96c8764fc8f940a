"""The error box shown next to a field: the engine's message about bad input, as escaped HTML.
A plain HTML pane, not a Markdown one: Markdown would turn ``[x](javascript:...)`` in a message into a link.

Messages quote what the user typed or uploaded (formulas, names, rows of a
file), so every part is escaped here, the one place that renders them.
"""
from __future__ import annotations

import panel as pn

from .escaping import Markup, text

ERROR_CSS = """
:host { width: 100%; }
.ld-error { background: #fdecec; color: #7a1f1f; border: 1px solid #f3c2c2; border-radius: 6px;
            padding: 8px 12px; font-size: 14px; line-height: 1.45; }
.ld-error pre { margin: 6px 0 0 0; font-size: 12.5px; background: none; border: none; padding: 0;
                white-space: pre; overflow-x: auto; color: #1f2933;
                font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; }
"""


def error_box() -> pn.pane.HTML:
    """An empty, hidden error box."""
    return pn.pane.HTML("", visible=False, sizing_mode="stretch_width", margin=(4, 10), stylesheets=[ERROR_CSS],
                        css_classes=["ld-error-box"])


def error_html(message: str) -> Markup:
    """One line per bad row of a file, and a formula's caret line (after the first new line) in a
    fixed-width block so it points at the right column."""
    first, _, rest = str(message).partition("\n")
    rows = first.split("; row ")
    lines = Markup("<br>").join([text(rows[0]), *(text(f"row {r}") for r in rows[1:])])
    caret = Markup("<pre>{}</pre>").format(rest) if rest else Markup("")
    return Markup('<div class="ld-error" role="alert">{}{}</div>').format(lines, caret)


def show_error(box: pn.pane.HTML, message: str | None) -> None:
    """Show ``message`` in ``box``, or hide the box when there is none."""
    if message:
        box.object = str(error_html(message))
    box.visible = bool(message)
