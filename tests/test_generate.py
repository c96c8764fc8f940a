"""Specifications for engine.generate: chunked draws whose numbers depend only on
(sampler, seed, chunk, n), resumable shard folders, and clear refusals.

The reference for every chunk is numpy's own parallel-stream definition (NEP 19):
chunk i = sampler.sample(size_i, default_rng(SeedSequence(seed, spawn_key=(i,)))).
"""
import argparse
import os
import socket

import numpy as np
import pytest

from lifedraw import engine
from lifedraw.engine import ModelError
from lifedraw.cli.generate_command import add_generate_parser
from lifedraw.engine.generate import (connect, generate, open_shards, read_manifest, sampler_fingerprint,
                                      sampler_from_bytes, sampler_to_bytes)
from lifedraw.engine.scenarios import load_scenario
from lifedraw.engine.systems import system_from_scenario

N, CHUNK, SEED = 40_000, 12_000, 11     # four chunks, the last one short


def spawned(seed, i):
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(i,)))


def numpy_reference(sampler, n, chunk, seed):
    sizes = [min(chunk, n - start) for start in range(0, n, chunk)]
    return np.concatenate([sampler.sample(size, spawned(seed, i)) for i, size in enumerate(sizes)])


@pytest.fixture(scope="module")
def weibull_sampler():
    return engine.fit(load_scenario("gearbox-wearout").target(), "inversion")


@pytest.fixture(scope="module")
def formula_sampler():
    # A density formula: its target holds compiled functions that plain pickle refuses.
    return engine.fit(load_scenario("compressor-density").target(), "inversion")


def listing(folder):
    return sorted(os.listdir(folder))


# ---- streams ----------------------------------------------------------------------------------

def test_chunk_i_is_the_sampler_drawing_from_the_ith_spawned_stream(weibull_sampler):
    x = generate(weibull_sampler, N, chunk=CHUNK, seed=SEED)
    assert x.chunks == ((12_000, 12_000, 12_000, 4_000),)
    np.testing.assert_array_equal(x.compute(scheduler="threads"), numpy_reference(weibull_sampler, N, CHUNK, SEED))


def test_chunks_computed_alone_and_in_reverse_equal_the_whole(weibull_sampler):
    x = generate(weibull_sampler, N, chunk=CHUNK, seed=SEED)
    whole = x.compute(scheduler="threads")
    parts = [x.blocks[i].compute(scheduler="sync") for i in reversed(range(x.numblocks[0]))]
    np.testing.assert_array_equal(np.concatenate(parts[::-1]), whole)


def test_a_system_generates_from_the_same_streams():
    system = system_from_scenario(load_scenario("pumping-station-system"))
    x = generate(system, 30_000, chunk=10_000, seed=5)
    np.testing.assert_array_equal(x.compute(scheduler="threads"), numpy_reference(system, 30_000, 10_000, 5))


def test_a_formula_sampler_survives_the_trip_through_bytes(formula_sampler):
    again = sampler_from_bytes(sampler_to_bytes(formula_sampler))
    np.testing.assert_array_equal(again.sample(10_000, 1), formula_sampler.sample(10_000, 1))
    assert sampler_fingerprint(again) == sampler_fingerprint(formula_sampler)


def test_fingerprint_ignores_set_up_time_but_not_the_model():
    target = load_scenario("compressor-density").target()
    assert sampler_fingerprint(engine.fit(target, "inversion")) == sampler_fingerprint(engine.fit(target, "inversion"))
    other = load_scenario("compressor-density").target(k=3.0)
    assert sampler_fingerprint(engine.fit(other, "inversion")) != sampler_fingerprint(engine.fit(target, "inversion"))


def test_streaming_life_summary_of_a_generated_array_equals_the_in_memory_one(weibull_sampler):
    # R(t) counts survivors exactly in both; the mean differs only by summation order.
    x = generate(weibull_sampler, N, chunk=CHUNK, seed=SEED)
    import dask
    with dask.config.set(scheduler="threads"):
        streamed = engine.life_summary(x, [8760.0, 17520.0])
    in_memory = engine.life_summary(x.compute(scheduler="threads"), [8760.0, 17520.0])
    assert streamed["n"] == in_memory["n"] == N
    assert [r["estimate"] for r in streamed["reliability"]] == [r["estimate"] for r in in_memory["reliability"]]
    assert streamed["mttf"]["estimate"] == pytest.approx(in_memory["mttf"]["estimate"], rel=1e-12)


# ---- shard folders -----------------------------------------------------------------------------

def test_out_writes_one_shard_per_chunk_and_a_manifest(weibull_sampler, tmp_path):
    out = tmp_path / "draws"
    x = generate(weibull_sampler, N, chunk=CHUNK, seed=SEED, out=out)
    assert listing(out) == ["draws-000000.npy", "draws-000001.npy", "draws-000002.npy", "draws-000003.npy",
                            "manifest.json"]
    np.testing.assert_array_equal(np.load(out / "draws-000003.npy"),
                                  weibull_sampler.sample(4_000, spawned(SEED, 3)))
    np.testing.assert_array_equal(x.compute(scheduler="threads"), numpy_reference(weibull_sampler, N, CHUNK, SEED))
    manifest = read_manifest(out)
    assert (manifest["n"], manifest["chunk"], manifest["seed"], manifest["chunks"]) == (N, CHUNK, SEED, 4)
    assert manifest["sampler"]["fingerprint"] == sampler_fingerprint(weibull_sampler)
    assert manifest["sampler"]["model"]["family"] == "weibull"
    assert manifest["versions"]["numpy"] == np.__version__


def test_an_interrupted_run_resumes_without_losing_or_repeating_a_shard(weibull_sampler, tmp_path):
    out = tmp_path / "draws"

    def stop_after_two(done, total, drawn):
        if drawn >= 2 * CHUNK:
            raise KeyboardInterrupt
    with pytest.raises(KeyboardInterrupt):
        generate(weibull_sampler, N, chunk=CHUNK, seed=SEED, out=out, progress=stop_after_two)
    written = [name for name in listing(out) if name.startswith("draws-")]
    assert 2 <= len(written) < 4
    x = generate(weibull_sampler, N, chunk=CHUNK, seed=SEED, out=out)
    assert len([name for name in listing(out) if name.startswith("draws-")]) == 4
    np.testing.assert_array_equal(x.compute(scheduler="threads"), numpy_reference(weibull_sampler, N, CHUNK, SEED))


def test_resume_redraws_missing_and_incomplete_shards_only(weibull_sampler, tmp_path):
    out = tmp_path / "draws"
    generate(weibull_sampler, N, chunk=CHUNK, seed=SEED, out=out)
    kept = os.stat(out / "draws-000000.npy")
    (out / "draws-000001.npy").unlink()
    # A crash mid-write leaves only a temporary file; a damaged copy leaves a short shard.
    (out / ".draws-000002.npy.0123abcd.tmp").write_bytes(b"\x93NUMPY half")
    with open(out / "draws-000003.npy", "r+b") as fh:
        fh.truncate(1000)
    drawn = []
    x = generate(weibull_sampler, N, chunk=CHUNK, seed=SEED, out=out,
                 progress=lambda done, total, this_run: drawn.append(this_run))
    assert drawn[-1] == CHUNK + 4_000                       # shards 1 and 3, nothing else
    after = os.stat(out / "draws-000000.npy")
    assert (after.st_ino, after.st_mtime_ns) == (kept.st_ino, kept.st_mtime_ns)
    assert not [name for name in listing(out) if name.endswith(".tmp")]
    np.testing.assert_array_equal(x.compute(scheduler="threads"), numpy_reference(weibull_sampler, N, CHUNK, SEED))


@pytest.mark.parametrize("change, words", [
    ({"seed": SEED + 1}, "seed"),
    ({"chunk": 10_000}, "chunk size"),
    ({"n": N + 1}, "n:"),
    ({"sampler": "other"}, "sampler"),
])
def test_shards_of_another_run_are_never_mixed_in(weibull_sampler, tmp_path, change, words):
    out = tmp_path / "draws"
    generate(weibull_sampler, N, chunk=CHUNK, seed=SEED, out=out)
    before = {name: os.stat(out / name).st_mtime_ns for name in listing(out)}
    settings = {"sampler": weibull_sampler, "n": N, "chunk": CHUNK, "seed": SEED, **change}
    if settings["sampler"] == "other":
        settings["sampler"] = engine.fit(load_scenario("gearbox-wearout").target(beta=3.0), "inversion")
    with pytest.raises(ModelError) as err:
        generate(settings.pop("sampler"), out=out, **settings)
    assert err.value.field == "out" and words in err.value.reason
    assert {name: os.stat(out / name).st_mtime_ns for name in listing(out)} == before


def test_a_non_empty_folder_without_a_manifest_is_refused(weibull_sampler, tmp_path):
    (tmp_path / "notes.txt").write_text("field notes")
    with pytest.raises(ModelError) as err:
        generate(weibull_sampler, N, chunk=CHUNK, seed=SEED, out=tmp_path)
    assert err.value.field == "out" and "not empty" in err.value.reason


def test_an_unfinished_folder_cannot_be_opened_as_draws(weibull_sampler, tmp_path):
    out = tmp_path / "draws"
    generate(weibull_sampler, N, chunk=CHUNK, seed=SEED, out=out)
    (out / "draws-000002.npy").unlink()
    with pytest.raises(ModelError, match="1 of 4 shards"):
        open_shards(out)


# ---- bad input --------------------------------------------------------------------------------

@pytest.mark.parametrize("field, kwargs", [
    ("n", {"n": 0}), ("n", {"n": -5}), ("n", {"n": 2.5}),
    ("chunk", {"chunk": 0}), ("chunk", {"chunk": -1}),
    ("seed", {"seed": -1}),
])
def test_sizes_and_seed_must_be_whole_and_positive(weibull_sampler, field, kwargs):
    settings = {"n": N, "chunk": CHUNK, "seed": SEED, **kwargs}
    with pytest.raises(ModelError) as err:
        generate(weibull_sampler, **settings)
    assert err.value.field == field


def test_a_chunk_larger_than_memory_is_refused(weibull_sampler):
    # 1e12 float64 draws are 8 TB: no machine running this suite holds one such chunk.
    with pytest.raises(ModelError) as err:
        generate(weibull_sampler, 10**12, chunk=10**12)
    assert err.value.field == "chunk" and "memory" in err.value.reason


def test_something_that_cannot_draw_is_refused():
    with pytest.raises(ModelError) as err:
        generate("weibull", N)
    assert err.value.field == "sampler"


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_an_unreachable_scheduler_is_a_clear_error():
    # The connection timeout bounds the wait; speed is not asserted here (it belongs in bench/),
    # and pytest-timeout guards against a hang.
    with pytest.raises(ModelError) as err:
        connect(f"tcp://127.0.0.1:{free_port()}", timeout=1.5)
    assert err.value.field == "scheduler" and "could not connect" in err.value.reason


# ---- command line -------------------------------------------------------------------------------

def run_cli(argv):
    parser = argparse.ArgumentParser(prog="lifedraw")
    add_generate_parser(parser.add_subparsers(dest="command", required=True))
    args = parser.parse_args(argv)
    return args.func(args)


def test_cli_generate_writes_the_scenario_system_to_shards(tmp_path, capsys):
    out = tmp_path / "station"
    assert run_cli(["generate", "pumping-station-system", "-n", "3e4", "--chunk", "1e4",
                    "--seed", "5", "--out", str(out)]) == 0
    system = system_from_scenario(load_scenario("pumping-station-system"))
    np.testing.assert_array_equal(open_shards(out).compute(scheduler="threads"),
                                  numpy_reference(system, 30_000, 10_000, 5))
    assert "3 shards" in capsys.readouterr().out


def test_cli_reports_an_unreachable_scheduler(tmp_path):
    with pytest.raises(ModelError) as err:
        run_cli(["generate", "gearbox-wearout", "-n", "1e4", "--out", str(tmp_path / "o"),
                 "--scheduler", f"tcp://127.0.0.1:{free_port()}", "--timeout", "1.5"])
    assert err.value.field == "scheduler"


# ---- a real cluster -----------------------------------------------------------------------------

@pytest.mark.cluster
@pytest.mark.parametrize("which", ["weibull_sampler", "formula_sampler"])
def test_two_worker_processes_give_the_threaded_numbers(cluster_client, request, which):
    sampler = request.getfixturevalue(which)
    n, chunk = 2_000_000, 250_000
    on_cluster = cluster_client.compute(generate(sampler, n, chunk=chunk, seed=SEED, client=cluster_client)).result()
    threaded = generate(sampler, n, chunk=chunk, seed=SEED).compute(scheduler="threads")
    np.testing.assert_array_equal(on_cluster, threaded)


@pytest.mark.cluster
def test_cluster_shards_equal_the_threaded_numbers(cluster_client, formula_sampler, tmp_path):
    x = generate(formula_sampler, 400_000, chunk=50_000, seed=SEED, client=cluster_client, out=tmp_path / "o")
    assert len([name for name in listing(tmp_path / "o") if name.startswith("draws-")]) == 8
    np.testing.assert_array_equal(x.compute(scheduler="threads"),
                                  generate(formula_sampler, 400_000, chunk=50_000, seed=SEED).compute(scheduler="threads"))
