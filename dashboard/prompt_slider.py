"""A parameter slider whose release the server answers at once.

Panel holds every change that arrives from the browser for 50 ms (``Syncable._debounce``) so that a
burst of changes is handled as one. A slider release is a single event the user is waiting on, and a
drag is a handful of events that our handler takes in about a millisecond each, so here the changes are
handled at the next turn of the server's loop instead: the 50 ms were a third of the release-to-redraw
time measured in bench/dashboard_latency.py. Everything else about the slider is Panel's.
"""
from __future__ import annotations

import panel as pn


class PromptSlider(pn.widgets.FloatSlider):
    """``pn.widgets.FloatSlider`` with no hold on the changes the browser sends (see the module)."""

    _debounce = 0
