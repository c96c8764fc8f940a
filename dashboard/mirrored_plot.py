"""A live picture whose new frames are drawn off the page and copied onto it as plain values: data,
ranges and texts. HoloViews draws each frame into a Bokeh plot that belongs to no document; the page
shows a second rendering of the same picture, and only the values that changed are copied across.

Why: HoloViews redraws a plot that sits in a document inside ``Document.models.freeze()``, and Bokeh
ends every freeze by walking every model of the page (``DocumentModelManager.recompute``: about 40 ms
for the drawing board's ~640 models on this machine), once per redrawn plot or per grouped update. A
change of plain values (arrays, numbers, strings) references no model, so Bokeh needs no walk for it.
A frame whose models differ in kind or number (a log axis, another glyph) is drawn afresh instead.
"""
from __future__ import annotations

from typing import Callable

import holoviews as hv
import numpy as np
from bokeh.document import Document
from bokeh.io.doc import patch_curdoc
from bokeh.model import Model
from holoviews.plotting.bokeh import BokehRenderer


def models_in_order(root: Model) -> list[Model]:
    """Every model reachable from ``root``, depth first, properties in name order: two renderings of
    the same picture list their models in the same order."""
    out, seen, todo = [], set(), [root]
    while todo:
        model = todo.pop()
        if id(model) in seen:
            continue
        seen.add(id(model))
        out.append(model)
        children = []
        for name in sorted(model.properties_with_refs()):
            _collect(getattr(model, name), children)
        todo.extend(reversed(children))
    return out


def holds_model(value) -> bool:
    """Whether ``value`` is or contains a Bokeh model (in lists, tuples or dicts)."""
    if isinstance(value, Model):
        return True
    if isinstance(value, dict):
        return any(holds_model(v) for v in value.values())
    if isinstance(value, (list, tuple)):
        return any(holds_model(v) for v in value)
    return False


def _collect(value, into: list) -> None:
    if isinstance(value, Model):
        into.append(value)
    elif isinstance(value, dict):
        for key in value:
            _collect(value[key], into)
    elif isinstance(value, (list, tuple)):
        for item in value:
            _collect(item, into)


def _property(model, name: str, default=None):
    """``model.name`` if the model has that property, else ``default``. (Bokeh answers a request for a
    property a model lacks with a fuzzy search for similar names, milliseconds per frame here.)"""
    return getattr(model, name) if name in model.properties() else default


def _shape(figure) -> tuple:
    """The identities of the models HoloViews replaces when a frame needs new ones: renderers, glyphs,
    sources, ranges, axes with their tickers and formatters, annotations, title (cheap to read)."""
    ids = [id(figure.x_range), id(figure.y_range), id(figure.title)]
    for r in figure.renderers:
        ids += [id(r), id(_property(r, "glyph")), id(_property(r, "data_source"))]
    for side in (figure.below, figure.left, figure.right, figure.above, figure.center):
        for m in side:
            ids += [id(m), id(_property(m, "ticker")), id(_property(m, "formatter"))]
            ids += [id(item) for item in _property(m, "items", [])]
    return tuple(ids)


def same_value(a, b) -> bool:
    """Equal as values (arrays element by element, NaN equal to NaN)."""
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        a, b = np.asarray(a), np.asarray(b)
        if a.shape != b.shape or a.dtype.kind != b.dtype.kind:
            return False
        return bool(np.array_equal(a, b, equal_nan=a.dtype.kind in "fc"))
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(same_value(a[k], b[k]) for k in a)
    if isinstance(a, (list, tuple)) and isinstance(b, (list, tuple)):
        return len(a) == len(b) and all(same_value(x, y) for x, y in zip(a, b))
    if isinstance(a, float) and isinstance(b, float) and a != a and b != b:
        return True
    try:
        return bool(a == b)
    except (TypeError, ValueError):
        return False


class MirroredPlot:
    """``picture(data)`` (a HoloViews element) shown as the Bokeh model ``figure``; ``show(data)`` draws
    the next frame. ``figure`` is replaced (and ``replaced`` turns True until ``take_replaced``) only when
    the frame's models differ from the shown ones."""

    def __init__(self, picture: Callable[[dict], hv.Element], data: dict):
        self.picture = picture
        self.replaced = False
        # HoloViews gives every plot it makes the current Bokeh document (``curdoc()``), which in a server
        # callback may be any session's, even a closed one's: these plots get a document of their own that
        # is never shown.
        self._document = Document()
        self.figure = self._render(picture(data)).state
        self.offstage = self.pipe = None        # made at the first new frame, so a new page costs one rendering
        self._pairs, self._shape = None, None

    def _render(self, element_or_map):
        """A HoloViews plot of ``element_or_map``, asked of the renderer class, not of HoloViews' shared
        renderer, which would keep the last plot it made (another session's) alive."""
        with patch_curdoc(self._document):
            return BokehRenderer.get_plot(element_or_map)

    def _follow(self, data: dict) -> None:
        """The plot off the page, drawing ``data``; HoloViews redraws it for each new frame. Its figure is
        in no document, so a redraw needs no freeze."""
        self.pipe = hv.streams.Pipe(data=data)
        dmap = hv.DynamicMap(lambda data: self.picture(data), streams=[self.pipe]).opts(framewise=True,
                                                                                         axiswise=True)
        self.offstage = self._render(dmap)
        self._pairs, self._shape = self._pair(), _shape(self.offstage.state)

    def _pair(self):
        """(offstage model, shown model, the value properties either has set), or None if the two
        renderings differ in their models' kinds or number."""
        theirs, ours = models_in_order(self.offstage.state), models_in_order(self.figure)
        if len(theirs) != len(ours) or any(type(a) is not type(b) for a, b in zip(theirs, ours)):
            return None
        pairs = []
        for source, shown in zip(theirs, ours):
            # A property that may hold a model (Bokeh counts a title's or an axis label's text among them:
            # it may be a TeX model) is copied while it holds plain values; a model is never shared.
            names = (set(source.properties_with_values(include_defaults=False))
                     | set(shown.properties_with_values(include_defaults=False))) - {"id", "name"}
            pairs.append((source, shown, sorted(names), set(source.properties_with_refs())))
        return pairs

    def show(self, data: dict) -> int:
        """Draw ``data``; returns the number of property values copied onto the page (-1: drawn afresh)."""
        if self.offstage is None:
            self._follow(data)
        else:
            self.pipe.send(data)
            shape = _shape(self.offstage.state)
            if shape != self._shape or self._pairs is None:
                # HoloViews made new models for this frame: pair them anew (values set for the first
                # time are picked up here too).
                self._pairs, self._shape = self._pair(), shape
        if self._pairs is None:
            # Another set of layers (field data, a log axis): HoloViews cannot grow the plot off the page
            # either, so both renderings start again from this frame.
            self.figure = self._render(self.picture(data)).state
            self._follow(data)
            self.replaced = True
            return -1
        copied = 0
        for source, shown, names, may_refer in self._pairs:
            for name in names:
                value = getattr(source, name)
                if name in may_refer and (holds_model(value) or holds_model(getattr(shown, name))):
                    continue
                if not same_value(getattr(shown, name), value):
                    setattr(shown, name, dict(value) if isinstance(value, dict) else value)
                    copied += 1
        return copied

    def take_replaced(self) -> bool:
        """Whether ``figure`` was replaced since the last call (the page must show the new one)."""
        replaced, self.replaced = self.replaced, False
        return replaced
