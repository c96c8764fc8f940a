"""How every plot of the page and the report labels its axes and shows its toolbar: counts with
k/M/G (M for millions), every log axis in one notation (2.5e-7, 1e3), and tools without a logo.

Bokeh tick formatters run in the browser; the two here are small JavaScript expressions of
our own, so the report (which has no server) formats its ticks the same way.
"""
from __future__ import annotations

from bokeh.models import CustomJSTickFormatter

#: 1,500 / 40 k / 60 M / 1.2 G: thousands separators up to 10,000, then k, M (millions) and G.
COUNT_JS = """
const a = Math.abs(tick);
const short = (v) => Number(v.toPrecision(3)).toString();
if (a >= 1e9) return short(tick / 1e9) + ' G';
if (a >= 1e6) return short(tick / 1e6) + ' M';
if (a >= 1e4) return short(tick / 1e3) + ' k';
if (a >= 1) return Math.round(tick).toLocaleString('en-US');
if (a === 0 || a >= 1e-3) return short(tick);
return Number(tick.toPrecision(3)).toExponential().replace('e+', 'e');
"""

#: Every tick of a log axis in the same exponent notation: 1e-7, 2.5e-4, 1e0, 1e3.
LOG_JS = """
if (tick <= 0) return '';
return Number(tick.toPrecision(3)).toExponential().replace('e+', 'e');
"""


def count_formatter() -> CustomJSTickFormatter:
    return CustomJSTickFormatter(code=COUNT_JS)


def log_formatter() -> CustomJSTickFormatter:
    return CustomJSTickFormatter(code=LOG_JS)


def hide_logo(plot, element) -> None:
    """HoloViews hook: keep the plot's tools, drop the plotting library's logo from its toolbar."""
    toolbar = getattr(plot.state, "toolbar", None)
    if toolbar is not None:
        toolbar.logo = None
