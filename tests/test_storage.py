"""Saved samplers: every method reloads without set-up and draws identically; pickling
goes through the same portable file; unreadable files give a clear ModelError."""
import json
import pickle

import numpy as np
import pytest

import lifedraw
from lifedraw import engine
from lifedraw.engine import ModelError, Target
from lifedraw.engine.scenarios import load_scenario

CASES = [
    ("compressor-density", "inversion"),
    ("compressor-density", "rejection"),
    ("compressor-density", "ratio-of-uniforms"),
    ("sensor-bathtub", "composition"),
    ("ebike-battery-returns", "table"),
    ("hydro-gate-bushings", "table"),
    ("gearbox-wearout", "inversion"),
]


@pytest.mark.parametrize("scenario, method", CASES)
def test_saved_sampler_draws_identically(tmp_path, scenario, method):
    sampler = engine.fit(load_scenario(scenario).target(), method)
    sampler.save(tmp_path / "s.lds")
    again = engine.load(tmp_path / "s.lds")
    assert type(again) is type(sampler)
    assert np.array_equal(again.sample(20_000, 11), sampler.sample(20_000, 11))
    assert again.setup_seconds == sampler.setup_seconds     # restored, not redone


@pytest.mark.parametrize("scenario, method", CASES)
def test_pickled_sampler_draws_identically(scenario, method):
    sampler = engine.fit(load_scenario(scenario).target(), method)
    again = pickle.loads(pickle.dumps(sampler))
    assert np.array_equal(again.sample(5_000, 3), sampler.sample(5_000, 3))


def test_leva_normal_round_trips(tmp_path):
    sampler = engine.fit(lifedraw.family("lognormal", mu=1.0, sigma=0.4, location=2.0), "ratio-of-uniforms")
    sampler.save(tmp_path / "n.lds")
    assert np.array_equal(engine.load(tmp_path / "n.lds").sample(5_000, 1), sampler.sample(5_000, 1))


def test_a_file_that_is_not_a_sampler_is_refused(tmp_path):
    path = tmp_path / "x.lds"
    path.write_bytes(b"not a zip at all")
    with pytest.raises(ModelError, match="could not be read"):
        engine.load(path)


def test_a_missing_file_is_named(tmp_path):
    with pytest.raises(ModelError, match="does not exist"):
        engine.load(tmp_path / "missing.lds")


def test_a_newer_format_version_is_refused(tmp_path):
    sampler = engine.fit(lifedraw.family("weibull", shape=2.0, scale=10.0))
    sampler.save(tmp_path / "s.lds")
    with np.load(tmp_path / "s.lds") as archive:
        arrays = {k: archive[k] for k in archive.files}
    meta = json.loads(bytes(arrays["lifedraw.json"]).decode())
    meta["version"] = 99
    arrays["lifedraw.json"] = np.frombuffer(json.dumps(meta).encode(), dtype=np.uint8)
    with open(tmp_path / "s.lds", "wb") as fh:
        np.savez(fh, **arrays)
    with pytest.raises(ModelError, match="version 99"):
        engine.load(tmp_path / "s.lds")
