"""Where the report's pictures are drawn: in this process, or in a second one that starts at once and
draws while this process computes what the pictures show.

``lifedraw report`` is two halves that share nothing but plain data: the engine's (importing numpy, scipy
and numba; the draws, checks, method comparison and fleet study) and the pictures' (importing HoloViews,
Bokeh and Panel; HoloViews turning elements into Bokeh models; packing them). A ``PictureProcess`` runs
the second half in its own interpreter (``multiprocessing``, "spawn": a fresh interpreter on every
platform), so on two cores the halves overlap. Orders travel as they are made (``PictureOrder``: a
picture function's name and its plain-data arguments, pickled), so the first pictures are drawn while
the method comparison still runs; the page's packed plots come back as text. This module itself
imports neither side: the command starts the process before it imports the engine.

``Pictures`` draws in this process: the page's Report step, whose server has HoloViews loaded already.
"""
from __future__ import annotations

import contextlib
import dataclasses
import gc
import multiprocessing
import os
import pickle
import traceback
import warnings
from concurrent.futures import ThreadPoolExecutor

#: The dashboard modules whose functions an order may name: pictures from plain arrays.
PICTURE_MODULES = ("plots", "reliability_plots", "fleet_plots")
#: How long a second process may take to hand back its pictures once every order is sent.
RESULT_SECONDS = 300


@dataclasses.dataclass(frozen=True)
class PictureOrder:
    """``module.function(*args, **kwargs)``: a picture function of ``PICTURE_MODULES`` and its data."""
    module: str
    function: str
    args: tuple = ()
    kwargs: dict = dataclasses.field(default_factory=dict)


def order(module: str, function: str, *args, **kwargs) -> PictureOrder:
    return PictureOrder(module, function, args, kwargs)


@dataclasses.dataclass(frozen=True)
class DrawnPictures:
    """The drawn pictures as the page's text (``packed_plots.PackedPlots`` with each order's divs):
    ``groups[i]`` the divs of order i, ``note`` the status line before the first plot, ``tail`` the packed
    bytes and their script for the end of the body, ``css`` for the note."""
    groups: list[list[str]]
    note: str
    tail: str
    css: str


class Pictures:
    """Draws every order in this process, as it comes. ``add`` returns the order's number,
    ``packed()`` the page's packed plots with each order's divs by that number."""

    def __init__(self):
        self.drawn: list[list] = []

    def add(self, picture: PictureOrder) -> int:
        from . import picture_drawing
        self.drawn.append(picture_drawing.draw(picture))
        return len(self.drawn) - 1

    def packed(self) -> DrawnPictures:
        from . import picture_drawing
        return picture_drawing.pack(self.drawn)

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        return None


class PictureProcess(Pictures):
    """Draws every order in a second process, started here; use it as a context manager, which stops
    the process however the block ends. Draws in this process instead where no second process can be
    started, or where it ends without a word (killed, or unable to start its interpreter): the orders
    sent are kept for that. A picture that fails in the second process fails the report, with its
    traceback."""

    def __init__(self):
        super().__init__()
        self.sent: list[PictureOrder] = []
        self.process = None
        context = multiprocessing.get_context("spawn")
        orders_in, orders_out = context.Pipe(duplex=False)
        results_in, results_out = context.Pipe(duplex=False)
        process = context.Process(target=draw_orders, args=(orders_in, results_out), daemon=True,
                                  name="lifedraw-pictures")
        try:
            process.start()
        except (OSError, RuntimeError):   # no second process here (limits, sandbox, a process that is
            for end in (orders_out, orders_in, results_in, results_out):   # itself starting): draw here
                end.close()
            return
        orders_in.close()    # the second process holds these ends now; closed here, a
        results_out.close()  # process that ends early is an end of file, not a wait
        self.process, self.orders, self.results = process, orders_out, results_in
        # Sending waits while the other process is busy importing (a pipe holds 64 kB): one thread sends,
        # in order, so this process computes on meanwhile.
        self.sender = ThreadPoolExecutor(max_workers=1, thread_name_prefix="lifedraw-picture-orders")

    def add(self, picture: PictureOrder) -> int:
        if self.process is None:
            return super().add(picture)
        self.sender.submit(self.orders.send_bytes, pickle.dumps(picture, protocol=pickle.HIGHEST_PROTOCOL))
        self.sent.append(picture)
        return len(self.sent) - 1

    def packed(self) -> DrawnPictures:
        if self.process is None:
            return super().packed()
        try:
            self.sender.submit(self.orders.send_bytes, pickle.dumps(None)).result()
        except OSError:      # the other process has gone; why, if it could say, is in the results
            pass
        if not self.results.poll(RESULT_SECONDS):
            raise RuntimeError(f"the report's pictures were not drawn within {RESULT_SECONDS} s")
        try:
            outcome, value = self.results.recv()
        except EOFError:
            warnings.warn(f"the process drawing the report's pictures ended early (exit code "
                          f"{self.process.exitcode}); drawing them in this process", RuntimeWarning, stacklevel=2)
            for picture in self.sent:
                super().add(picture)
            return super().packed()
        if outcome != "drawn":
            raise RuntimeError(f"drawing the report's pictures failed:\n{value}")
        return value

    def __exit__(self, *exc) -> None:
        if self.process is None:
            return
        self.sender.shutdown(wait=False, cancel_futures=True)
        for end in (self.orders, self.results):
            end.close()
        # Its pictures are in hand (or no longer wanted): stopped rather than waited for while its
        # interpreter tears down the ~300,000 objects the plotting libraries made.
        self.process.kill()
        self.process.join()


def usable_cores() -> int:
    """The CPU cores this process may run on (its affinity where the platform tells it)."""
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0))
    return os.cpu_count() or 1


def report_pictures() -> Pictures:
    """Where ``lifedraw report`` draws: a second process when a second core can run it alongside this one
    (it costs a second interpreter and a second numpy import, about 0.2 s of CPU), else this process."""
    return PictureProcess() if usable_cores() > 1 else Pictures()


def draw_orders(orders, results) -> None:
    """The second process: import the plotting side, draw each order as it arrives, and at the end
    (``None``) send the packed page back. Any failure goes back as its traceback.

    The cyclic garbage collector stays off: this process lives a few seconds and every object of the
    plotting libraries lives as long, so each collection would walk some 300,000 objects to free about
    3 MB (``lifedraw report`` pauses it in its own process too)."""
    gc.disable()
    try:
        from . import picture_drawing
        picture_drawing.prepare()
        drawn = []
        while True:
            if not orders.poll():
                picture_drawing.while_idle()
            if (picture := pickle.loads(orders.recv_bytes())) is None:
                break
            drawn.append(picture_drawing.draw(picture))
        results.send(("drawn", picture_drawing.pack(drawn)))
    except (EOFError, KeyboardInterrupt):  # the ordering process ended or was stopped: it wants nothing back
        pass
    except BaseException:
        with contextlib.suppress(OSError):     # unless it has gone meanwhile
            results.send(("failed", traceback.format_exc()))
