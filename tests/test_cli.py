"""The lifedraw command: scenarios, sample, check, compare, from a shell."""
import subprocess
import sys

import numpy as np
import pytest

from lifedraw.engine.scenarios import scenario_names


def run(*args, check=True):
    return subprocess.run([sys.executable, "-m", "lifedraw", *args], capture_output=True, text=True,
                          check=check, timeout=240)


def test_scenarios_lists_one_line_each_name_then_title():
    out = run("scenarios").stdout.strip().splitlines()
    assert [line.split()[0] for line in out] == scenario_names()


@pytest.mark.parametrize("suffix", [".npy", ".csv"])
def test_sample_writes_the_requested_number_of_draws(tmp_path, suffix):
    path = tmp_path / f"draws{suffix}"
    run("sample", "gearbox-wearout", "-n", "2e4", "--seed", "5", "-o", str(path))
    x = np.load(path) if suffix == ".npy" else np.loadtxt(path, skiprows=1)
    assert x.shape == (20_000,) and np.all(x > 0)


def test_sample_is_reproducible_for_a_seed(tmp_path):
    a, b = tmp_path / "a.npy", tmp_path / "b.npy"
    run("sample", "compressor-density", "-n", "5000", "--seed", "9", "--method", "inversion", "-o", str(a))
    run("sample", "compressor-density", "-n", "5000", "--seed", "9", "--method", "inversion", "-o", str(b))
    assert np.array_equal(np.load(a), np.load(b))


def test_check_passes_and_prints_the_tests():
    out = run("check", "kiln-fan-belts", "-n", "50000").stdout
    assert "Kolmogorov-Smirnov" in out and "Anderson-Darling" in out and "PASS" in out


def test_bad_input_is_one_clear_line_and_exit_code_2(tmp_path):
    res = run("sample", "gearbox-wearout", "-n", "-5", "-o", str(tmp_path / "x.npy"), check=False)
    assert res.returncode == 2
    assert "n:" in res.stderr and "Traceback" not in res.stderr


def test_method_not_applicable_is_reported():
    res = run("check", "gearbox-wearout", "--method", "table", check=False)
    assert res.returncode == 2 and "table method serves binned" in res.stderr


def test_compare_prints_every_method():
    out = run("compare", "sensor-bathtub", "-n", "30000").stdout
    assert "inversion" in out and "composition" in out and "not applicable" in out


# ---- in-process: exit codes, options and files (lifedraw.cli.main.main, no shell needed) ----------

def cli(*args):
    from lifedraw.cli.main import main
    return main([str(a) for a in args])


def test_check_exits_1_when_the_draws_fail(monkeypatch, capsys):
    # A real fault (every draw 1 % too large, as tests/test_fault_injection.py injects) makes the
    # check fail, and the command says so with exit code 1.
    from lifedraw.engine.methods.inversion import Inversion
    original = Inversion._draw
    monkeypatch.setattr(Inversion, "_draw", lambda self, m, rng: 1.01 * original(self, m, rng))
    assert cli("check", "gearbox-wearout", "-n", "1e5", "--method", "inversion") == 1
    assert "overall: FAIL" in capsys.readouterr().out


def test_check_exits_0_when_the_draws_pass(capsys):
    assert cli("check", "gearbox-wearout", "-n", "1e5", "--method", "inversion") == 0
    assert "overall: PASS" in capsys.readouterr().out


def test_sample_writes_plain_text_with_one_draw_a_line(tmp_path, capsys):
    from lifedraw import engine
    from lifedraw.engine.scenarios import load_scenario
    path = tmp_path / "draws.txt"
    assert cli("sample", "gearbox-wearout", "-n", "1000", "--seed", "3", "--method", "inversion", "-o", path) == 0
    want = engine.fit(load_scenario("gearbox-wearout").target(), "inversion").sample(1000, 3)
    # %.17g round-trips a double exactly.
    np.testing.assert_array_equal(np.loadtxt(path), want)


def test_an_unknown_output_suffix_is_refused_and_nothing_is_written(tmp_path, capsys):
    path = tmp_path / "draws.xlsx"
    assert cli("sample", "gearbox-wearout", "-n", "100", "-o", path) == 2
    err = capsys.readouterr().err
    assert "output:" in err and "unknown file type '.xlsx'" in err and "Traceback" not in err
    assert not path.exists()


def test_sample_honours_method_and_tolerance(tmp_path, capsys):
    from lifedraw import engine
    from lifedraw.engine.scenarios import load_scenario
    target = load_scenario("compressor-density").target()
    loose, tight = tmp_path / "loose.npy", tmp_path / "tight.npy"
    assert cli("sample", "compressor-density", "-n", "5000", "--seed", "4", "--method", "inversion",
               "--tolerance", "1e-6", "-o", loose) == 0
    assert cli("sample", "compressor-density", "-n", "5000", "--seed", "4", "--method", "inversion",
               "-o", tight) == 0
    np.testing.assert_array_equal(np.load(loose), engine.fit(target, "inversion", 1e-6).sample(5000, 4))
    assert not np.array_equal(np.load(loose), np.load(tight))
    rej = tmp_path / "rejection.npy"
    assert cli("sample", "compressor-density", "-n", "5000", "--seed", "4", "--method", "rejection", "-o", rej) == 0
    assert "method: rejection" in capsys.readouterr().out
    np.testing.assert_array_equal(np.load(rej), engine.fit(target, "rejection").sample(5000, 4))


def test_a_toml_path_is_a_scenario(tmp_path, capsys):
    from lifedraw import engine
    from lifedraw.engine.scenarios import load_scenario, scenario_from_toml
    text = load_scenario("gearbox-wearout").to_toml().replace("value = 2.6", "value = 4.1")
    scenario_file = tmp_path / "my-gearbox.toml"
    scenario_file.write_text(text, encoding="utf-8")
    out = tmp_path / "x.npy"
    assert cli("sample", scenario_file, "-n", "2000", "--seed", "8", "--method", "inversion", "-o", out) == 0
    target = scenario_from_toml(text).target()
    assert target.params["shape"] == 4.1
    np.testing.assert_array_equal(np.load(out), engine.fit(target, "inversion").sample(2000, 8))


def test_ctrl_c_stops_with_exit_code_130_and_no_traceback(monkeypatch, tmp_path, capsys):
    from lifedraw.engine.methods.inversion import Inversion

    def interrupted(self, m, rng):
        raise KeyboardInterrupt
    monkeypatch.setattr(Inversion, "_draw", interrupted)
    assert cli("sample", "gearbox-wearout", "-n", "100", "--method", "inversion", "-o", tmp_path / "x.npy") == 130
    err = capsys.readouterr().err
    assert "stopped" in err and "Traceback" not in err


def test_serve_binds_loopback_unless_told_otherwise():
    from lifedraw.cli.main import build_parser
    from lifedraw.dashboard.defaults import DEFAULT_ADDRESS
    assert DEFAULT_ADDRESS == "127.0.0.1"
    args = build_parser().parse_args(["serve"])
    assert args.address == "127.0.0.1" and args.port == 7263
    assert build_parser().parse_args(["serve", "--address", "0.0.0.0"]).address == "0.0.0.0"


def test_serve_passes_the_address_to_the_server(monkeypatch):
    # The server itself is not started: its entry point records what the command hands it.
    from lifedraw.dashboard import app
    seen = {}
    monkeypatch.setattr(app, "serve", lambda **kw: seen.update(kw) or 0)
    assert cli("serve") == 0
    assert seen["address"] == "127.0.0.1" and seen["port"] == 7263


def test_compare_honours_seed_0_and_the_tolerance(monkeypatch, capsys):
    # `--seed 0` once fell back to the scenario's seed (args.seed or ...); 0 is a seed like any other.
    from lifedraw.engine import compare
    seen = {}
    monkeypatch.setattr(compare, "compare_methods", lambda target, **kw: seen.update(kw) or [])
    assert cli("compare", "gearbox-wearout", "-n", "1000", "--seed", "0", "--tolerance", "1e-6") == 0
    assert seen["rng"] == 0 and seen["tolerance"] == 1e-6 and seen["n"] == 1000
    seen.clear()
    assert cli("compare", "gearbox-wearout", "-n", "1000") == 0
    assert seen["rng"] == 4101 and seen["tolerance"] == 1e-10          # the scenario's own


@pytest.mark.parametrize("unit, column", [
    ("hours", "lifetime_hours"),
    ("h\n1e9", "lifetime_h_1e9"),                 # a new line would add a row of data
    ("=HYPERLINK(\"x\")", "lifetime_HYPERLINK_x"),  # a leading = would be a spreadsheet formula
    ("d,ays", "lifetime_d_ays"),                  # a comma would split the column
])
def test_the_csv_header_carries_the_unit_as_one_safe_cell(unit, column):
    # Reference for the hazard: OWASP's "CSV injection" note (cells starting with = + - @ run as formulas).
    from lifedraw.cli.main import csv_column_name
    assert csv_column_name("lifetime", unit) == column
