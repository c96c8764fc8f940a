"""The live check's pictures as MirroredPlots (dashboard.mirrored_plot): after every new frame the shown
Bokeh plot carries exactly what HoloViews draws for that frame, and a redraw needs no walk over the page's
models. The reference is HoloViews itself: ``hv.render`` of the same picture from the same data.
"""
from __future__ import annotations

import holoviews as hv
import pytest
from bokeh.document import Document
from bokeh.models import LegendItem, Model

from lifedraw.dashboard.live_check_step import PICTURES, picture_data
from lifedraw.dashboard.mirrored_plot import MirroredPlot, models_in_order, same_value
from lifedraw.dashboard.state import DrawingBoard


def plain(value) -> bool:
    """A value that holds no Bokeh model (references are compared by the models' kinds instead)."""
    if isinstance(value, Model):
        return False
    if isinstance(value, dict):
        return all(plain(v) for v in value.values())
    if isinstance(value, (list, tuple)):
        return all(plain(v) for v in value)
    return True


def differences(shown, reference) -> list:
    """Every property set on either side whose values hold no model (a title's text is such a value, though
    Bokeh lists it among the properties that may refer to models) and differ."""
    ours, theirs = models_in_order(shown), models_in_order(reference)
    if [type(m) for m in ours] != [type(m) for m in theirs]:
        return ["the models differ in kind or number"]
    out = []
    for a, b in zip(ours, theirs):
        # tags: HoloViews' own notes on a range (its dimension, for linking axes), made with the plot and
        # never drawn; a plot HoloViews redraws keeps its first ones.
        names = (set(a.properties_with_values(include_defaults=False))
                 | set(b.properties_with_values(include_defaults=False))) - {"id", "name", "tags"}
        out += [f"{type(a).__name__}.{n}" for n in sorted(names)
                if plain(getattr(a, n)) and plain(getattr(b, n)) and not same_value(getattr(a, n), getattr(b, n))]
    return out


def test_the_shown_title_counts_the_draws():
    # The title's text was never copied (Bokeh lists it among the properties that may hold a model),
    # so the page kept the first frame's count while the stream ran on; the axis labels likewise kept
    # the first scenario's time unit.
    state = DrawingBoard("gearbox-wearout", batch_size=5_000)
    mirror = MirroredPlot(PICTURES["hist"], picture_data(state, "hist"))
    for _ in range(3):
        state.step()
        mirror.show(picture_data(state, "hist"))
        assert mirror.figure.title.text.startswith(f"{state.n:,} draws")


@pytest.mark.parametrize("key", sorted(PICTURES))
def test_each_frame_shows_what_holoviews_draws_for_it(key):
    state = DrawingBoard("gearbox-wearout", batch_size=5_000)
    mirror = MirroredPlot(PICTURES[key], picture_data(state, key))
    # batches, refits that move every range, a reset to no draws, other scenarios' models, field data
    # (the Weibull plot gains a layer) and back
    for change in (lambda: state.step(), lambda: state.set_value("beta", 4.2), lambda: state.step(),
                   lambda: state.reset(), lambda: state.set_value("eta", 12_000.0),
                   lambda: setattr(state, "scenario_name", "sensor-bathtub"), lambda: state.step(),
                   lambda: setattr(state, "scenario_name", "hydro-gate-bushings"), lambda: state.step(),
                   lambda: setattr(state, "scenario_name", "gearbox-wearout")):
        change()
        data = picture_data(state, key)
        mirror.show(data)
        assert differences(mirror.figure, hv.render(PICTURES[key](data), backend="bokeh")) == []


def test_the_same_frame_again_copies_nothing_and_a_new_one_copies_only_values():
    state = DrawingBoard("gearbox-wearout", batch_size=5_000)
    mirror = MirroredPlot(PICTURES["hist"], state.histogram_data())
    state.step()
    assert mirror.show(state.histogram_data()) > 0          # new counts, a new title, a new y range
    assert mirror.show(state.histogram_data()) == 0
    assert not mirror.take_replaced()


def test_a_frame_with_other_models_is_drawn_afresh():
    # A log density axis is another kind of scale: Bokeh cannot change it in place.
    state = DrawingBoard("gearbox-wearout", batch_size=5_000)
    mirror = MirroredPlot(PICTURES["hist"], state.histogram_data())
    shown = mirror.figure
    state.log_scale = True
    assert mirror.show(state.histogram_data()) == -1
    assert mirror.figure is not shown and mirror.take_replaced() and not mirror.take_replaced()
    assert differences(mirror.figure, hv.render(PICTURES["hist"](state.histogram_data()), backend="bokeh")) == []
    state.step()
    assert mirror.show(state.histogram_data()) > 0          # from then on, values are copied again


def test_field_data_adds_a_layer_and_the_picture_follows():
    state = DrawingBoard("gearbox-wearout", batch_size=5_000)
    mirror = MirroredPlot(PICTURES["weibull"], state.weibull_data())
    state.scenario_name = "hydro-gate-bushings"               # recorded failures with suspensions
    assert mirror.show(state.weibull_data()) == -1
    labels = {str(item.label.value) for item in mirror.figure.select({"type": LegendItem})}
    assert "field data" in labels
    state.step()
    assert mirror.show(state.weibull_data()) > 0


def count_recomputes(doc):
    calls = []
    original = doc.models.recompute

    def counted():
        calls.append(1)
        return original()
    doc.models.recompute = counted
    return calls


def test_a_redraw_on_the_page_walks_no_models_where_holoviews_would():
    state = DrawingBoard("gearbox-wearout", batch_size=5_000)
    mirror = MirroredPlot(PICTURES["hist"], state.histogram_data())
    doc = Document()
    doc.add_root(mirror.figure)
    calls = count_recomputes(doc)
    for _ in range(3):
        state.step()
        assert mirror.show(state.histogram_data()) > 0
    assert calls == []
    # The same frames redrawn by HoloViews inside a document: each ends in a walk over the models.
    pipe = hv.streams.Pipe(data=state.histogram_data())
    plot = hv.renderer("bokeh").get_plot(hv.DynamicMap(PICTURES["hist"], streams=[pipe]))
    other = Document()
    other.add_root(plot.state)
    plot.document = other
    calls = count_recomputes(other)
    state.step()
    pipe.send(state.histogram_data())
    assert len(calls) >= 1
