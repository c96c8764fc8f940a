"""The report's pictures made from their orders: each order names a picture function of the dashboard
(``plots``, ``reliability_plots``, ``fleet_plots``) and its plain-data arguments; HoloViews draws what it
returns with its Bokeh renderer (``hv.render``) and ``packed_plots`` packs every model into the page.

This is the side of the report that loads HoloViews, Bokeh and Panel; ``picture_process`` runs it in this
process or in a second one, and nothing here touches the engine.
"""
from __future__ import annotations

from importlib import import_module

import holoviews as hv

from .packed_plots import pack_plots, packed_bokehjs
from .picture_process import PICTURE_MODULES, DrawnPictures, PictureOrder


def draw(order: PictureOrder) -> list:
    """The Bokeh models of one order: one per HoloViews element its function returns (one or a list)."""
    if order.module not in PICTURE_MODULES:
        raise ValueError(f"pictures come from the modules {', '.join(PICTURE_MODULES)}, not {order.module!r}")
    made = getattr(import_module(f"{__package__}.{order.module}"), order.function)(*order.args, **order.kwargs)
    return [hv.render(element, backend="bokeh") for element in (made if isinstance(made, list) else [made])]


def pack(drawn: list[list]) -> DrawnPictures:
    """Every order's models packed into one page (``pack_plots``), with the divs grouped per order."""
    packed = pack_plots([model for models in drawn for model in models])
    groups, start = [], 0
    for models in drawn:
        groups.append(packed.divs[start:start + len(models)])
        start += len(models)
    return DrawnPictures(groups, packed.note, packed.tail, packed.css)


def prepare() -> None:
    """Work that needs no order, done while the first orders are computed: the picture modules loaded
    (the first sets up HoloViews' Bokeh backend, about 0.4 s)."""
    for name in PICTURE_MODULES:
        import_module(f"{__package__}.{name}")


def while_idle() -> None:
    """Work for a moment with no order waiting: BokehJS packed (once per process, about 50 ms)."""
    packed_bokehjs()
