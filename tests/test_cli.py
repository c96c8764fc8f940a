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
    run("sample", "compressor-density", "-n", "5000", "--seed", "9", "-o", str(a))
    run("sample", "compressor-density", "-n", "5000", "--seed", "9", "-o", str(b))
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
