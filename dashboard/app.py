"""Compose the drawing board page, one state per browser session, and serve it on loopback.
Panel/Bokeh server (Tornado); every script and stylesheet is served by the app itself, none from a CDN.

``create_app`` is called once per session; its ``PageUpdates`` draws one bounded
batch per tick while the stream runs, so the page never freezes, each tab has its
own stream, and an idle tab costs nothing.
"""
from __future__ import annotations

import gc
import html
import logging
import os
import socket
import time
from pathlib import Path

import panel as pn

from .defaults import DEFAULT_ADDRESS, DEFAULT_PORT
from .fleet_view import FleetView
from .host_guard import guard
from .page_updates import PageUpdates
from .state import DrawingBoard
from .views import (ComparisonStep, GeneratorStep, GeometryStep, LifeStep, LiveCheckStep, ModelStep, ReportStep,
                    caution_banner)

log = logging.getLogger("lifedraw.dashboard")

TITLE = "lifedraw — lifetime sampler drawing board"
# A closed tab's session is destroyed (and its state released) once it has had no connection for
# SESSION_LIFETIME_MS, checked every SESSION_CHECK_MS: within about 10 s, not Bokeh's default ~30 s.
# The lifetime also bounds the time between a page's arrival and its WebSocket connection.
SESSION_CHECK_MS = 2_000
SESSION_LIFETIME_MS = 8_000
PAGE_CSS = """
body { background: #f3f4f6; font-family: -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; }
"""
HEADER_CSS = """
h1 { font-size: 24px; margin: 6px 0 2px 0; color: #1f2933; font-weight: 650; }
p { margin: 0; color: #4b5563; font-size: 14px; }
"""


def _configure() -> None:
    # In server mode Panel serves Bokeh's and its own files from /static; inline
    # resources keep any exported output self-contained too. Nothing points at a CDN
    # (the browser test aborts every request that leaves the server).
    pn.config.inline = True
    pn.extension(raw_css=[PAGE_CSS], notifications=False, design="native")


def _log_timings() -> None:
    """LIFEDRAW_DEBUG=1: log each action's and tick's duration and every full garbage collection."""
    log.setLevel(logging.DEBUG)
    started = {}

    def timer(phase, info):
        if phase == "start":
            started["t"] = time.perf_counter()
        elif info["generation"] == 2:
            log.debug("gc gen2 %.0f ms", 1e3 * (time.perf_counter() - started.get("t", 0.0)))

    gc.callbacks.append(timer)


def _settle_memory() -> None:
    """Move the page's long-lived objects out of the garbage collector's way.

    A full collection walks every object the page holds (thousands of Bokeh
    models, HoloViews plots) and stalls the event loop for a few hundred ms;
    after ``gc.freeze`` it walks only what the stream creates. The session's
    end unfreezes them again so they can be collected.
    """
    gc.collect()
    gc.freeze()


def default_report_dir() -> Path:
    """Where the Report step writes: $LIFEDRAW_REPORT_DIR, else ~/lifedraw-reports (outside any checkout)."""
    return Path(os.environ.get("LIFEDRAW_REPORT_DIR") or Path.home() / "lifedraw-reports")


def create_app(scenario: str | None = None, report_dir=None) -> pn.Column:
    """Build one session's page: a fresh ``DrawingBoard``, the steps that present it and the fleet step."""
    state = DrawingBoard(scenario)
    report_dir = Path(report_dir or default_report_dir())
    model, generator = ModelStep(state, on_drag=lambda: updates.dragging()), GeneratorStep(state)
    live, geometry, comparison = LiveCheckStep(state), GeometryStep(state), ComparisonStep(state)
    life, report = LifeStep(state), ReportStep(state, report_dir)
    fleet = FleetView(state)
    geometry.refresh()
    life.refresh()
    updates = PageUpdates(state, live, geometry, life)

    header = pn.pane.HTML(
        f"<h1>{html.escape(TITLE)}</h1><p>Reproduce a reliability model with exact, fast random lifetimes, "
        "watch the draws converge on it, and compare the sampling methods.</p>",
        stylesheets=[HEADER_CSS], sizing_mode="stretch_width", margin=(4, 0))
    page = pn.Column(
        header, caution_banner(),
        *(step.panel() for step in (model, generator, live, geometry, comparison, life, fleet, report)),
        caution_banner(),
        sizing_mode="stretch_width", max_width=1240, styles={"margin": "0 auto"}, css_classes=["ld-page"])
    doc = pn.state.curdoc
    if doc is not None and doc.session_context is not None:
        updates.attach(doc, connected=lambda: browser_connected(doc))
        pn.state.onload(_settle_memory)
        log.info("session %s opened", doc.session_context.id)

        pn.state.on_session_destroyed(lambda context: release_session(updates, state, context.id))
    return page


def browser_connected(doc) -> bool:
    """Whether a browser still shows ``doc``'s page: the server keeps a closed tab's session until its
    next check for unused sessions, a few seconds, before destroying it."""
    context = doc.session_context
    session = context.session if context is not None else None
    return session is None or session.connection_count > 0


def release_session(updates: PageUpdates, state: DrawingBoard, session_id: str = "") -> None:
    """Let go of what a closed tab's session holds: its follow-up callback, then its draws and the
    tables derived from its model."""
    updates.detach()
    state.release()
    gc.unfreeze()
    log.info("session %s released", session_id)


def serve(port: int = DEFAULT_PORT, address: str = DEFAULT_ADDRESS, scenario: str | None = None, report_dir=None,
          show: bool = False) -> int:
    """Serve the drawing board until Ctrl-C; returns 0 after a clean stop."""
    from lifedraw.engine.scenarios import load_scenario
    if scenario:
        load_scenario(scenario)    # a bad name fails here, with its message, before the server starts
    _configure()
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(name)s %(levelname)s: %(message)s")
    if os.environ.get("LIFEDRAW_DEBUG"):
        _log_timings()
    logging.getLogger("tornado.access").setLevel(logging.WARNING)
    origins = {f"{address}:{port}", f"localhost:{port}", f"127.0.0.1:{port}"}
    if address in ("0.0.0.0", "::", ""):
        # Bound to every interface on purpose: accept this machine's own names as origins.
        origins |= {f"{socket.gethostname()}:{port}", f"{socket.getfqdn()}:{port}"}
    url = f"http://{address}:{port}/"
    print(f"lifedraw drawing board: {url}  (Ctrl-C stops it)", flush=True)
    server = pn.serve({"/": lambda: create_app(scenario, report_dir)}, port=port, address=address,
                      websocket_origin=sorted(origins), show=show, start=False, threaded=False, title=TITLE,
                      # location=False: the page reads no URL (Panel's reader fails on "[::1]").
                      verbose=False, location=False, check_unused_sessions_milliseconds=SESSION_CHECK_MS,
                      unused_session_lifetime_milliseconds=SESSION_LIFETIME_MS)
    # Bokeh keeps its tornado application private; tornado's public add_handlers puts the guard in front.
    guard(server._tornado, address)
    server.start()
    try:
        server.io_loop.start()
    except RuntimeError:    # the loop was stopped by Ctrl-C (Panel's signal handler)
        pass
    print("lifedraw drawing board: stopped", flush=True)
    return 0
