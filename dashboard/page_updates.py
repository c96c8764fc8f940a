"""The page's follow-up updates (after a batch or a refit), run only while there is something to do.
An idle tab costs the server nothing: the periodic callback exists only while the stream runs or a step is stale.

One bounded piece of work per tick keeps the server answering the next user
action quickly: one piece of the live check's secondary plots, the life figures, or
the geometry after a refit (the stale steps take turns), and while the stream runs,
batches and these pieces alternate, so a slider release waits at most for one piece.
A change of the state (a batch, a refit, a start) wakes the callback; the first
tick that finds nothing to do removes it again. Each tick's updates go out as
one message (``pn.io.hold``); only a tick that redraws HoloViews plots inside the
page (the geometry) ends in a recomputation of the document's model graph. While several tabs stream,
their batches together take at most half of the loop (``LoopBudget``), so a new
page opens and a slider answers between them.
"""
from __future__ import annotations

import collections
import logging
import time
from typing import Callable

import panel as pn

log = logging.getLogger("lifedraw.dashboard")

#: Period of the follow-up updates while there is work.
TICK_MS = 250
#: While a slider handle moves the stream yields, so its release finds the server idle.
DRAG_GRACE_S = 0.6


class LoopBudget:
    """The share of the event loop that the streams of all sessions together may take, over a sliding
    window, split evenly between the streams that run: beyond its part a stream skips its turn, so a
    new page or a user action finds the loop free, and no stream starves the others."""

    def __init__(self, share: float = 0.5, window: float = 2.0, clock=time.perf_counter):
        self.share, self.window, self.clock = float(share), float(window), clock
        self._spent: collections.deque = collections.deque()     # (when it ended, seconds, whose)

    def _recent(self):
        horizon = self.clock() - self.window
        while self._spent and self._spent[0][0] < horizon:
            self._spent.popleft()
        return self._spent

    def allows(self, owner=None) -> bool:
        recent = self._recent()
        recent.append((self.clock(), 0.0, owner))       # asking counts the stream among those sharing
        allowance = self.share * self.window
        if sum(seconds for _, seconds, _ in recent) >= allowance:
            return False
        owners = {who for _, _, who in recent} | {owner}
        mine = sum(seconds for _, seconds, who in recent if who == owner)
        return mine < allowance / len(owners)

    def record(self, seconds: float, owner=None) -> None:
        self._spent.append((self.clock(), float(seconds), owner))


#: One budget for the whole server: the streams share one event loop (one per process).
STREAMS = LoopBudget()


class PageUpdates:
    """Drive the stale steps and the stream of one session's page."""

    def __init__(self, state, live, geometry, life, budget: LoopBudget = STREAMS):
        self.state, self.live, self.geometry, self.life = state, live, geometry, life
        self.budget = budget
        self.yield_until = 0.0
        self.updates = 0          # ticks that changed the page (each one recomputes the document)
        self._doc = None
        self._connected: Callable[[], bool] = lambda: True
        self._callback = None
        self._turn = 0                # whose follow-up goes next (see _next_follow_up)
        self._stepped_last = False    # while streaming, batches and follow-up pieces take turns
        state.param.watch(lambda e: self.wake(), ["batch", "version", "running"])

    # ---- what there is to do -------------------------------------------------------------
    def dragging(self) -> None:
        self.yield_until = time.monotonic() + DRAG_GRACE_S

    def pending(self) -> bool:
        return bool(self.live.stale or self.geometry.stale or self.life.stale or self.state.running)

    def _next_follow_up(self):
        """The next stale step's redraw, taking the stale steps in turn (live check, life figures,
        geometry), so that none waits for another while the stream keeps making the live check stale."""
        order = [(self.live, self.live.refresh_secondary), (self.life, self.life.refresh),
                 (self.geometry, self.geometry.refresh)]
        for k in range(len(order)):
            owner, redraw = order[(self._turn + k) % len(order)]
            if owner.stale:
                self._turn = (self._turn + k + 1) % len(order)
                return owner, redraw
        return None, None

    def tick(self) -> bool:
        """Do one piece of work; returns whether the page changed."""
        if time.monotonic() < self.yield_until or not self._connected():
            return False
        if not self.pending():
            self.sleep()
            return False
        stale = self.live.stale or self.geometry.stale or self.life.stale
        # While the stream runs, batches and follow-up pieces take turns; a batch only within the
        # stream's share of the loop.
        stream_turn = self.state.running and not (stale and self._stepped_last)
        if stream_turn and not self.budget.allows(id(self)):
            if not stale:
                return False              # the streams have had their share of the loop: skip this turn
            stream_turn = False
        owner, work = (self.state, self.state.step) if stream_turn else self._next_follow_up()
        try:
            start = time.perf_counter()
            # The live check's plots copy plain values onto the page (MirroredPlot): no walk over the page's
            # models is needed. The geometry's HoloViews plots redraw inside the page, each ending in such a
            # walk; freezing the document makes it one walk for all of them.
            with pn.io.hold(freeze=owner is self.geometry):
                work()
            self._stepped_last = stream_turn
            seconds = time.perf_counter() - start
            self.budget.record(seconds, id(self))
            self.updates += 1
            log.debug("tick took %.0f ms", 1e3 * seconds)
            return True
        except Exception:
            log.exception("unexpected error in the periodic update")
            return False

    # ---- the periodic callback (server sessions only) -----------------------------------------
    @property
    def awake(self) -> bool:
        return self._callback is not None

    def attach(self, doc, connected: Callable[[], bool] = lambda: True) -> None:
        """Run the ticks on ``doc`` (a Bokeh document of a server session) while there is work and
        ``connected()`` says a browser shows the page: a closed tab's session lingers a few seconds
        before the server ends it, and work for it would only fail to reach it."""
        self._doc = doc
        self._connected = connected
        self.wake()

    def wake(self) -> None:
        if self._doc is not None and self._callback is None:
            self._callback = self._doc.add_periodic_callback(self.tick, TICK_MS)

    def sleep(self) -> None:
        if self._callback is not None:
            callback, self._callback = self._callback, None
            try:
                self._doc.remove_periodic_callback(callback)
            except ValueError:       # already removed with the session
                pass

    def detach(self) -> None:
        """The session has ended: stop for good. The server destroys an ended session's document, and
        the document's callbacks with it, before the session-destroyed callbacks run; asked to remove
        one, that document fails inside Bokeh and stays behind as Bokeh's current document (which
        breaks every later ``curdoc()``). So nothing is asked of it: only the references are dropped."""
        self._callback = None
        self._doc = None
        self._connected = lambda: True
