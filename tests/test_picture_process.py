"""Specifications for the report's pictures drawn apart from the engine (dashboard.picture_process):
a second process draws exactly the pictures this process would, fails loudly, is stopped however the
report ends, and loads no engine; the command line and ``import lifedraw`` load only what they use.

The reference for "the same pictures" is the report's own in-process drawing (``Pictures``) of the
same orders: the plot documents Bokeh serialises, compared as JSON with Bokeh's per-process model ids
replaced by their order of appearance.
"""
from __future__ import annotations

import json
import pickle
import re
import subprocess
import sys

import holoviews as hv
import pytest

from lifedraw.dashboard import picture_drawing
from lifedraw.dashboard.packed_plots import packed_payloads
from lifedraw.dashboard import picture_process
from lifedraw.dashboard.picture_process import PictureOrder, PictureProcess, Pictures, order
from lifedraw.dashboard.report import build_report
from lifedraw.engine.compare import compare_methods
from lifedraw.engine.scenarios import load_scenario


class RecordedPictures(Pictures):
    """In-process drawing that also keeps the orders, to draw them again elsewhere."""

    def __init__(self):
        super().__init__()
        self.orders: list[PictureOrder] = []

    def add(self, picture):
        self.orders.append(picture)
        return super().add(picture)

    def packed(self):
        self.drawn_pictures = super().packed()       # a model joins one document only: packed once
        return self.drawn_pictures


def plot_documents(drawn) -> str:
    """The packed plot documents as JSON text, Bokeh's model ids and document ids by order of appearance.
    A column of text (the method names of the comparison's whiskers) is written as an object array by a
    process without pandas and as a list by one that has loaded it: the same values, read as a list here."""
    def lists(node):
        if isinstance(node, dict):
            if node.get("type") == "ndarray" and node.get("dtype") == "object":
                return [lists(v) for v in node["array"]]
            return {k: lists(v) for k, v in node.items()}
        return [lists(v) for v in node] if isinstance(node, list) else node

    text = json.dumps(lists(packed_payloads(drawn.tail)["docs"]), sort_keys=True)
    ids: dict[str, str] = {}
    text = re.sub(r'"p\d+"', lambda m: ids.setdefault(m.group(0), f'"model-{len(ids)}"'), text)
    return re.sub(r"[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}", "uuid", text)


@pytest.fixture(scope="module")
def recorded():
    """The orders of a gearbox report (its method comparison measured once, reused by every drawing)."""
    scenario = load_scenario("gearbox-wearout")
    rows = [r.to_dict() for r in compare_methods(scenario.target(), n=20_000, rng=3, tolerance=1e-10)]
    pictures = RecordedPictures()
    build_report(scenario, n=20_000, seed=3, comparison=rows, pictures=pictures)
    return pictures


def draw_apart(orders) -> object:
    with PictureProcess() as pictures:
        assert pictures.process is not None, "the second process did not start"
        groups = [pictures.add(o) for o in orders]
        drawn = pictures.packed()
    assert groups == list(range(len(orders)))
    return drawn


def test_a_second_process_draws_the_same_pictures_as_this_one(recorded):
    apart = draw_apart(recorded.orders)
    here = recorded.drawn_pictures
    assert [len(g) for g in apart.groups] == [len(g) for g in here.groups]
    assert sum(len(g) for g in here.groups) >= 14        # 6 checks, geometry, comparison charts, fleet
    assert plot_documents(apart) == plot_documents(here)


def test_plain_array_storage_draws_what_data_frame_storage_drew(recorded, monkeypatch):
    # HoloViews' default store (pandas data frames first) against the plain stores the dashboard sets:
    # the same models and values.
    plain = plot_documents(recorded.drawn_pictures)
    monkeypatch.setattr(hv.Dataset, "datatype", list(hv.core.data.datatypes))
    assert hv.Dataset.datatype[0] == "dataframe"
    framed_orders = [picture_drawing.draw(o) for o in recorded.orders]
    assert "DataFrame" in type(hv.Curve(([1.0, 2.0], [3.0, 4.0])).data).__name__
    assert plot_documents(picture_drawing.pack(framed_orders)) == plain


def test_a_failing_picture_comes_back_as_an_error_with_its_traceback():
    bad = order("plots", "qq_plot", {"no": "data"}, width=300, height=200)
    with PictureProcess() as pictures:
        process = pictures.process
        pictures.add(bad)
        with pytest.raises(RuntimeError, match=r"(?s)drawing the report's pictures failed:.*KeyError"):
            pictures.packed()
    assert not process.is_alive()


def test_a_process_that_ends_without_a_word_is_replaced_by_drawing_here(recorded):
    with PictureProcess() as pictures:
        for o in recorded.orders:
            pictures.add(o)
        pictures.process.kill()          # as the system's out-of-memory killer would
        pictures.process.join()
        with pytest.warns(RuntimeWarning, match="ended early"):
            drawn = pictures.packed()
    assert plot_documents(drawn) == plot_documents(recorded.drawn_pictures)


def test_one_core_draws_in_this_process(monkeypatch):
    monkeypatch.setattr(picture_process, "usable_cores", lambda: 1)
    assert type(picture_process.report_pictures()) is Pictures
    monkeypatch.setattr(picture_process, "usable_cores", lambda: 2)
    with picture_process.report_pictures() as pictures:
        assert isinstance(pictures, PictureProcess) and pictures.process.is_alive()


def test_the_process_is_stopped_when_the_report_fails_before_its_pictures():
    with pytest.raises(ZeroDivisionError):
        with PictureProcess() as pictures:
            process = pictures.process
            1 / 0
    assert process.exitcode is not None


def test_an_order_may_name_only_the_picture_modules():
    with pytest.raises(ValueError, match="pictures come from the modules"):
        picture_drawing.draw(order("report", "write_report"))


def test_orders_and_drawn_pictures_travel_as_plain_data():
    # What crosses between the processes must unpickle without the plotting libraries or the engine.
    code = ("import pickle, sys\n"
            "from lifedraw.dashboard.picture_process import DrawnPictures, order\n"
            "o = pickle.loads(pickle.dumps(order('plots', 'qq_plot', {'x': [1.0]}, width=3)))\n"
            "d = pickle.loads(pickle.dumps(DrawnPictures([['<div></div>']], 'n', 't', 'c')))\n"
            "print(o.kwargs['width'], d.groups[0][0], [m for m in ('numpy', 'holoviews', 'bokeh', 'lifedraw.engine')"
            " if m in sys.modules])\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["3", "<div></div>", "[]"]


def test_the_picture_side_loads_no_engine_scipy_or_pandas(recorded):
    # The second process must not pay for the engine's imports (numpy's are shared), nor for pandas.
    orders = pickle.dumps(recorded.orders[:3])
    code = ("import pickle, sys\n"
            "from lifedraw.dashboard import picture_drawing\n"
            "picture_drawing.prepare()\n"
            "drawn = [picture_drawing.draw(o) for o in pickle.loads(sys.stdin.buffer.read())]\n"
            "picture_drawing.pack(drawn)\n"
            "print(','.join(m for m in ('scipy', 'numba', 'pandas', 'lifedraw.engine') if m in sys.modules))\n")
    out = subprocess.run([sys.executable, "-c", code], input=orders, capture_output=True, check=True)
    assert out.stdout.decode().strip() == ""


def test_the_command_line_and_the_package_face_load_the_engine_only_when_used():
    code = ("import sys\n"
            "import lifedraw\n"
            "from lifedraw.cli.main import build_parser\n"
            "build_parser().parse_args(['report', 'gearbox-wearout', '-o', 'x.html'])\n"
            "before = [m for m in ('numpy', 'scipy', 'numba', 'lifedraw.engine') if m in sys.modules]\n"
            "import lifedraw.engine\n"
            "same = lifedraw.fit is lifedraw.engine.fit and lifedraw.check is lifedraw.engine.check\n"
            "print(before, same, sorted(lifedraw.__all__) == sorted([*lifedraw.engine.__all__, '__version__']))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["[]", "True", "True"]
