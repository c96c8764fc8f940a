"""The ``lifedraw fleet`` command and the scenarios' [fleet] tables.

The figures themselves are proven in test_fleet.py, test_age_replacement.py and test_warranty.py
against scipy and closed forms; here: the command prints them with the cautions and writes the same
numbers to JSON, and a bad [fleet] table is refused with the key named.
"""
import json
import subprocess
import sys

import pytest

from lifedraw.cli.main import main
from lifedraw.engine.errors import ModelError
from lifedraw.engine.scenarios import load_scenario, scenario_from_toml, scenario_names

BASE = """
title = "Fictional test fleet"
[model]
kind = "family"
family = "weibull"
params = { shape = 2.0, scale = 100.0 }
"""


def test_at_least_three_shipped_scenarios_carry_a_fleet_table():
    with_fleet = [name for name in scenario_names() if load_scenario(name).fleet is not None]
    assert len(with_fleet) >= 3


def test_fleet_command_prints_the_figures_and_writes_them(tmp_path, capsys):
    out = tmp_path / "kiln.json"
    assert main(["fleet", "kiln-fan-belts", "--runs", "30", "--units", "12", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "optimal replacement age" in text and "spares for a 95% service level" in text
    assert "independent units" in text and "qualified engineers" in text
    data = json.loads(out.read_text())
    assert data["units"] == 12 and data["runs"] == 30
    assert len(data["failures"]["mean"]) == len(data["period_edges"]) - 1
    assert data["age_replacement"]["optimal_age"] > 0


def test_fleet_command_runs_a_warranty_study_from_a_shell(tmp_path):
    result = subprocess.run([sys.executable, "-m", "lifedraw", "fleet", "ebike-battery-returns", "--runs", "20"],
                            capture_output=True, text=True, timeout=240)
    assert result.returncode == 0, result.stderr
    assert "Free-replacement warranty claims" in result.stdout


def test_fleet_command_refuses_a_non_json_output(tmp_path, capsys):
    assert main(["fleet", "gearbox-wearout", "--out", str(tmp_path / "x.csv")]) == 2
    assert "out:" in capsys.readouterr().err


@pytest.mark.parametrize("table, field", [
    ("[fleet]\nhorizon = 10\nperiod = 1", "fleet.units"),
    ("[fleet]\nunits = 0\nhorizon = 10\nperiod = 1", "fleet.units"),
    ("[fleet]\nunits = 5\nhorizon = 10\nperiod = 1\nspeed = 3", "fleet.speed"),
    ("[fleet]\nunits = 5\nhorizon = 10\nperiod = 0", "fleet.period"),
    ("[fleet]\nunits = 5\nhorizon = 10\nperiod = 1\nages = [1, 2]", "fleet.ages"),
    ("[fleet]\nunits = 5\nhorizon = 10\nperiod = 1\nage_profile = [{ age = 0, units = 4 }]", "fleet.age_profile"),
    ("[fleet]\nunits = 5\nhorizon = 10\nperiod = 1\ncost_failure = 9", "fleet.cost_preventive"),
    ("[fleet]\nunits = 5\nhorizon = 10\nperiod = 1\nwarranty = 12", "fleet.sales"),
    ("[fleet]\nunits = 5\nhorizon = 10\nperiod = 1\nwarranty = 12\nsales = [1, -2]", "fleet.sales[1]"),
])
def test_a_bad_fleet_table_names_its_key(table, field):
    with pytest.raises(ModelError) as err:
        scenario_from_toml(BASE + table)
    assert err.value.field == field


def test_fleet_table_survives_saving():
    sc = load_scenario("gearbox-wearout")
    assert scenario_from_toml(sc.to_toml()).fleet == sc.fleet
