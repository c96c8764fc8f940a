"""Small things on the page that cost trust, checked on its state without a browser
(dashboard.state): the stream runs until Pause, the method menu offers what can serve the model
and shows what runs after a refusal, uploads take their own time unit and mission times, mixture
weights are shown as used, and an edited model says it was edited.

The mixture's renormalisation is the definition of a finite mixture (weights w_i / sum w_j,
e.g. NIST/SEMATECH e-Handbook 8.1.8 on mixtures of populations, from memory).
"""
import pytest

from lifedraw.dashboard.state import STREAM_LIMIT, DrawingBoard

FAILURES_CSV = "time,suspended\n5200,0\n8100,0\n9400,1\n11800,0\n12500,0\n14100,1\n15000,0\n"


def test_start_streams_well_past_the_first_batch_until_pause():
    board = DrawingBoard("gearbox-wearout", batch_size=10_000)
    assert board.stop_at == STREAM_LIMIT
    board.start()
    for _ in range(15):
        board.step()
    assert board.running and board.n == 16 * 10_000     # the first batch plus fifteen more, still going
    board.pause()
    assert not board.running


def test_the_menu_offers_only_methods_that_can_serve_the_model():
    board = DrawingBoard("gearbox-wearout")
    offered = board.method_availability()
    assert offered["inversion"] is None and offered["auto"] is None
    assert "binned or discrete" in offered["table"]           # a continuous Weibull
    assert "not a mixture" in offered["composition"]


def test_after_a_refusal_the_menu_shows_what_runs():
    board = DrawingBoard("gearbox-wearout")
    board.method = "rejection"
    assert board.sampler.method == "rejection"
    board.method = "table"
    assert board.method == "rejection" and board.sampler.method == "rejection"
    assert board.errors["method"].startswith("table: ") and "Still running: rejection" in board.errors["method"]


def test_uploaded_field_data_takes_its_own_unit_and_mission_times():
    board = DrawingBoard("sensor-bathtub")               # ages in days, missions 365 and 1095
    assert board.load_field_data(FAILURES_CSV.encode(), "bushings.csv", time_unit="cycles",
                                 mission_times="5000, 10000")
    assert board.scenario.time_unit == "cycles"
    assert list(board.scenario.mission_times) == [5000.0, 10000.0]


@pytest.mark.parametrize("unit, missions, field", [("", "5000", "time unit"), ("h<b>", "5000", "time unit"),
                                                   ("hours", "soon", "mission times"),
                                                   ("hours", "-5", "mission times")])
def test_an_upload_without_a_clear_unit_or_missions_is_refused_with_the_reason(unit, missions, field):
    board = DrawingBoard("sensor-bathtub")
    assert not board.load_field_data(FAILURES_CSV.encode(), "x.csv", time_unit=unit, mission_times=missions)
    assert board.errors["upload"].startswith(field)
    assert board.scenario.name == "sensor-bathtub"          # the last valid model keeps running


def test_mixture_weights_are_shown_as_used():
    board = DrawingBoard("sensor-bathtub")                   # weights p_infant, p_random, 0.70
    assert board.set_value("p_infant", 0.14)
    rows = board.effective_weights()
    total = 0.14 + 0.22 + 0.70
    assert [r["set"] for r in rows] == pytest.approx([0.14, 0.22, 0.70])
    assert [r["used"] for r in rows] == pytest.approx([0.14 / total, 0.22 / total, 0.70 / total])
    assert rows[0]["used"] == pytest.approx(0.132, abs=5e-4)  # the 13.2 %


def test_an_edited_model_says_it_was_edited():
    board = DrawingBoard("gearbox-wearout")
    assert board.apply_family("lognormal", "mu = 9.5, sigma = 0.4")
    assert board.scenario.story.startswith("Edited in this session")
    assert "Valdren" in board.scenario.story               # the original story is kept, marked as such
    assert board.apply_family("weibull", "shape = 2, scale = 9000")
    assert board.scenario.story.count("Edited in this session") == 1


def test_an_empty_family_choice_is_explained():
    board = DrawingBoard("sensor-bathtub")
    assert not board.apply_family("", "")
    assert board.errors["model"] == "family: choose a family from the menu"
