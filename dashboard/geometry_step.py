"""Step 4, the method's geometry: the sampler's own picture (hat and squeeze, (u, v) region,
inverse cdf and u-error, tables), redrawn in place while its structure stays the same."""
from __future__ import annotations

import html

import holoviews as hv
import numpy as np
import panel as pn

from . import plots
from .step_base import Step, text_pane


# ---- 4. geometry -----------------------------------------------------------------------------

class GeometryStep(Step):
    number = 4
    title = "Method geometry"
    blurb = "How the chosen method turns uniform numbers into lifetimes, drawn from the sampler's own tables."

    def __init__(self, state):
        super().__init__(state)
        self.caption = text_pane()
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
