"""An idle page does no work (issue 14, item 5): the follow-up updates run only after a change, and the
periodic callback exists on the Bokeh document only while there is something to do.

The count is of calls into the cells' redraw methods and the stream's batches,
each of which ends in a recomputation of the document's model graph; the speed
itself is measured in bench/idle_sessions.py, not asserted here.
"""
from __future__ import annotations

import collections

import pytest
from bokeh.document import Document

from lifedraw.dashboard.page_updates import LoopBudget, PageUpdates
from lifedraw.dashboard.state import DrawingBoard
from lifedraw.dashboard.views import GeometryStep, LifeStep, LiveCheckStep


@pytest.fixture
def page():
    state = DrawingBoard("gearbox-wearout", batch_size=2_000)
    state.stop_at = 6_000                     # (the scenario's own sample size would take 50 batches)
    live, geometry, life = LiveCheckStep(state), GeometryStep(state), LifeStep(state)
    geometry.refresh()
    life.refresh()
    updates = PageUpdates(state, live, geometry, life, budget=LoopBudget(share=1e9))   # (the server's is shared)
    calls = collections.Counter()
    for owner, name in ((live, "refresh_secondary"), (geometry, "refresh"), (life, "refresh"), (state, "step")):
        original = getattr(owner, name)

        def counted(*args, _original=original, _key=f"{type(owner).__name__}.{name}", **kwargs):
            calls[_key] += 1
            return _original(*args, **kwargs)
        setattr(owner, name, counted)
    return state, updates, calls


def _settle(updates, limit=50):
    for _ in range(limit):
        if not updates.pending():
            return
        updates.tick()
    raise AssertionError("the page kept finding work")


def test_an_idle_page_recomputes_nothing(page):
    state, updates, calls = page
    _settle(updates)
    done, seen = updates.updates, dict(calls)
    for _ in range(40):                       # ten seconds of ticks at 250 ms
        assert updates.tick() is False
    assert updates.updates == done
    assert dict(calls) == seen


def test_a_change_is_drawn_then_the_page_is_idle_again(page):
    state, updates, calls = page
    _settle(updates)
    before = updates.updates
    state.set_value("beta", 3.1)              # a refit: the geometry and the life figures go stale
    assert updates.pending()
    _settle(updates)
    assert updates.updates > before
    assert calls["GeometryStep.refresh"] >= 1


def test_the_stream_runs_to_its_stop_and_then_stops_asking(page):
    state, updates, calls = page
    state.start()
    _settle(updates)
    assert state.n == state.stop_at and not state.running
    assert calls["DrawingBoard.step"] == 2      # 2,000 drawn at the refit, then two batches to 6,000


def test_the_periodic_callback_exists_only_while_there_is_work(page):
    state, updates, _ = page
    doc = Document()
    updates.attach(doc)
    assert updates.awake and len(doc.session_callbacks) == 1
    _settle(updates)
    updates.tick()                            # finds nothing to do: removes itself
    assert not updates.awake and len(doc.session_callbacks) == 0
    state.start()                             # a change wakes it
    assert updates.awake and len(doc.session_callbacks) == 1
    updates.sleep()
    assert len(doc.session_callbacks) == 0


def test_a_released_session_lets_go_of_its_draws(page):
    state, updates, _ = page
    updates.detach()
    state.release()
    assert state.acc is None and state.table is None and not state.running


def test_a_session_bokeh_has_destroyed_is_released(page):
    # Bokeh destroys a closed tab's document (its callback tables with it) before the
    # session-destroyed callbacks run. Asking that document to remove the follow-up callback
    # failed, the release stopped there and the session's draws were never let go (seen in
    # the server log).
    # Asking the destroyed document anything also left it behind as Bokeh's current document,
    # so that every later curdoc() failed once it was collected.
    import gc

    from bokeh.io import curdoc

    from lifedraw.dashboard.app import release_session
    state, updates, _ = page
    doc = Document()
    updates.attach(doc)
    state.start()
    assert updates.awake
    doc.callbacks.destroy()                   # what Document.destroy does to the callbacks
    release_session(updates, state, "closed tab")
    assert not updates.awake
    assert state.acc is None and state.table is None and not state.running
    del doc
    gc.collect()
    curdoc()                                  # raised "Patched curdoc has been previously destroyed"


def test_no_work_is_done_for_a_page_no_browser_shows(page):
    # A closed tab's session lives on until the server's next check for unused sessions; the
    # stream kept drawing for it and every update failed to reach the closed connection.
    state, updates, calls = page
    shown = [False]
    updates.attach(Document(), connected=lambda: shown[0])
    state.start()
    steps = calls["DrawingBoard.step"]
    assert updates.tick() is False and calls["DrawingBoard.step"] == steps
    shown[0] = True                           # a browser (re)connects: the stream goes on
    _settle(updates)
    assert calls["DrawingBoard.step"] > steps and state.n == state.stop_at


def test_a_session_counts_as_shown_while_it_has_a_connection():
    from types import SimpleNamespace

    from lifedraw.dashboard.app import browser_connected

    def doc(connections):
        return SimpleNamespace(session_context=SimpleNamespace(session=SimpleNamespace(connection_count=connections)))
    assert browser_connected(doc(1)) and not browser_connected(doc(0))
    assert browser_connected(SimpleNamespace(session_context=None))   # not served: nothing to check


def test_the_streams_share_of_the_loop_is_bounded():
    now = [0.0]
    budget = LoopBudget(share=0.5, window=2.0, clock=lambda: now[0])
    assert budget.allows()
    budget.record(0.6)
    now[0] += 0.1
    budget.record(0.5)
    assert not budget.allows()            # 1.1 s of the last 2 s: more than half
    now[0] += 1.95                        # the first entry leaves the window
    assert budget.allows()


def test_a_stream_waits_its_turn_when_the_budget_is_spent(page):
    state, updates, calls = page
    _settle(updates)
    updates.budget = LoopBudget(share=0.5, window=3600.0)
    updates.budget.record(3600.0)
    state.start()
    steps = calls["DrawingBoard.step"]
    assert updates.tick() is False and calls["DrawingBoard.step"] == steps
    assert updates.pending()              # still due: it runs once the budget allows


def test_each_stream_gets_an_even_part_of_the_budget():
    now = [0.0]
    budget = LoopBudget(share=0.5, window=2.0, clock=lambda: now[0])
    budget.record(0.6, "busy")               # one stream took 0.6 s of the 1 s allowance
    assert budget.allows("quiet")             # another has had nothing: its turn
    assert not budget.allows("busy")          # more than its half (0.5 s) of the allowance
    budget.record(0.1, "quiet")
    assert budget.allows("quiet")
