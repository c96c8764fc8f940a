"""The fleet step's state and the report's fleet section, without a browser.

The numbers are the engine's (proven in test_fleet.py, test_age_replacement.py, test_warranty.py
against scipy and closed forms); here: the step takes the scenario's [fleet] table, validates what
the user types with the field named, and hands plain data to the plots and the report.
"""
import asyncio

import numpy as np
import pytest

from lifedraw.dashboard.fleet_state import FleetStep, fleet_payload, parse_sales
from lifedraw.dashboard.fleet_view import FleetView
from lifedraw.dashboard.report import build_report
from lifedraw.dashboard.state import DrawingBoard
from lifedraw.engine.errors import ModelError
from lifedraw.engine.scenarios import load_scenario


def test_the_step_takes_the_scenarios_fleet_table():
    sc = load_scenario("gearbox-wearout")
    step = FleetStep()
    step.adopt(sc, sc.target())
    settings = step.settings()
    assert settings.units == 140 and settings.cost_failure == 11000
    np.testing.assert_array_equal(settings.unit_ages(), sc.fleet.unit_ages())


def test_a_resized_fleet_keeps_its_age_profile():
    sc = load_scenario("gearbox-wearout")
    step = FleetStep()
    step.adopt(sc, sc.target())
    step.units = 14
    ages = step.settings().unit_ages()
    assert ages.size == 14 and sorted(set(ages)) == [0.0, 9000.0, 21000.0]


def test_scenarios_without_a_table_get_defaults():
    sc = load_scenario("sensor-bathtub")
    step = FleetStep()
    step.adopt(sc, sc.target())
    assert step.units == 100 and step.warranty == 0 and step.cost_failure == 0


@pytest.mark.parametrize("changes, field", [
    (dict(period=0.0), "fleet.period"), (dict(sales="10, x"), "fleet.sales"),
    (dict(sales="10, 20", warranty=0.0), "fleet.warranty"), (dict(cost_failure=5.0), "fleet.cost_preventive"),
])
def test_bad_settings_name_their_field(changes, field):
    sc = load_scenario("kiln-fan-belts")
    step = FleetStep()
    step.adopt(sc, sc.target())
    step.param.update(**{"cost_preventive": 0.0, "cost_failure": 0.0, **changes})
    with pytest.raises(ModelError) as err:
        step.settings()
    assert err.value.field == field


def test_sales_parser():
    assert parse_sales("60, 90;120\n 0") == [60, 90, 120, 0]
    with pytest.raises(ModelError):
        parse_sales("1.5")


def test_the_payload_is_plain_data_with_the_exact_references():
    sc = load_scenario("ebike-battery-returns")
    step = FleetStep()
    step.adopt(sc, sc.target())
    step.runs = 40
    data = fleet_payload(sc.target(), None, step.settings(), 1)
    assert data["exact"].shape == data["mean"].shape == (len(data["edges"]) - 1,)
    assert data["warranty"]["expected"].size == len(sc.fleet.sales) + 7
    assert data["age_replacement"] is None


def test_a_failed_run_is_reported_not_raised():
    sc = load_scenario("gearbox-wearout")
    step = FleetStep()
    step.adopt(sc, sc.target())
    bad = step.settings().with_values(ages=1e9)
    outcome = fleet_payload(sc.target(), None, bad, 1)
    assert isinstance(outcome, ModelError) and outcome.field == "ages"
    step.set_result(outcome, "")
    assert "ages" in step.error and step.result is None


def test_the_view_runs_a_study_off_the_event_loop_and_shows_four_plots():
    state = DrawingBoard("gearbox-wearout")
    view = FleetView(state)
    view.fleet.param.update(runs=30, warranty=8760.0, sales="10, 20")
    asyncio.run(view._run(None))
    assert view.fleet.error == ""
    assert len(view.plots.objects) == 4
    assert "optimal replacement age" in view.summary.object


def test_the_report_has_the_fleet_section_with_its_assumptions():
    text = build_report(load_scenario("kiln-fan-belts"), n=5000, comparison=[])
    assert 'id="fleet"' in text and "optimal replacement age" in text
    assert "independent units" in text and "qualified engineers" in text
