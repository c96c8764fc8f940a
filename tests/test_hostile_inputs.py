"""Hostile inputs (issue 14): crafted sampler files, impossible models, files and sizes that
once crashed, froze or answered wrongly now get a ModelError naming the field and the reason.

Each test is one probe from the issue (or a stronger one). The reference for "right" is the
rule of the house: a clear ModelError, never a traceback, a hang or raw memory.
"""
import io
import json
import math
import zipfile

import numpy as np
import pytest

import lifedraw
from lifedraw import engine
from lifedraw.engine import ModelError, kernels
from lifedraw.engine.storage import dumps, loads


# ---- crafted sampler files ---------------------------------------------------------------------

def _arrays(sampler):
    with np.load(io.BytesIO(dumps(sampler))) as archive:
        return {k: archive[k] for k in archive.files}


def _pack(arrays) -> bytes:
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    return buffer.getvalue()


def _with(sampler, **changes) -> bytes:
    arrays = _arrays(sampler)
    for key, value in changes.items():
        arrays[f"table.{key}"] = value
    return _pack(arrays)


def _with_meta(sampler, edit) -> bytes:
    arrays = _arrays(sampler)
    meta = json.loads(bytes(arrays["lifedraw.json"]).decode())
    edit(meta)
    arrays["lifedraw.json"] = np.frombuffer(json.dumps(meta).encode(), dtype=np.uint8)
    return _pack(arrays)


@pytest.fixture(scope="module")
def pinv():
    # A density formula: numerical inversion with guide, polynomial and u_start tables.
    return engine.fit(lifedraw.density_formula("t**1.5*exp(-t)", (0, math.inf)), "inversion")


@pytest.fixture(scope="module")
def rejection():
    return engine.fit(lifedraw.family("gamma", shape=2.5, scale=3.0), "rejection")


@pytest.fixture(scope="module")
def mixture():
    return engine.fit(lifedraw.mixture([lifedraw.family("weibull", shape=0.8, scale=50.0),
                                        lifedraw.family("weibull", shape=3.0, scale=500.0)], [0.3, 0.7]),
                      "composition")


@pytest.fixture(scope="module")
def histogram():
    return engine.fit(lifedraw.binned_counts([0, 1, 2, 4], [5, 9, 3]), "table")


@pytest.fixture(scope="module")
def ratio():
    return engine.fit(lifedraw.family("gamma", shape=2.5, scale=3.0), "ratio-of-uniforms")


@pytest.mark.parametrize("value", [10**9, -10**12])
def test_guide_entries_out_of_range_are_refused(pinv, value):
    guide = pinv.guide.copy()
    guide[len(guide) // 2] = value
    with pytest.raises(ModelError, match="'guide' table holds"):
        loads(_with(pinv, guide=guide))


def test_a_guide_given_as_floats_is_refused(pinv):
    with pytest.raises(ModelError, match="whole numbers"):
        loads(_with(pinv, guide=pinv.guide.astype(float) + 0.5))


def test_an_alias_pointing_outside_the_components_is_refused(mixture):
    with pytest.raises(ModelError, match="'alias' table holds 7"):
        loads(_with(mixture, alias=np.array([0, 7])))


def test_an_alias_outside_the_bins_is_refused(histogram):
    with pytest.raises(ModelError, match="'alias' table holds -1"):
        loads(_with(histogram, alias=np.array([0, -1, 2])))


def test_a_negative_segment_area_is_refused(rejection):
    area = rejection.seg_area.copy()
    area[3] = -5.0
    with pytest.raises(ModelError, match="'seg_area' table holds -5"):
        loads(_with(rejection, seg_area=area))


def test_a_hat_smaller_than_the_density_is_refused(rejection):
    with pytest.raises(ModelError, match="cannot cover"):
        loads(_with(rejection, seg_area=rejection.seg_area * 0.5))


def test_a_nan_coefficient_is_refused(pinv):
    coef = pinv.coef.copy()
    coef[2, 3] = np.nan
    with pytest.raises(ModelError, match="'coef' table holds NaN"):
        loads(_with(pinv, coef=coef))


def test_tables_of_the_wrong_shape_are_refused(pinv, ratio):
    with pytest.raises(ModelError, match="'coef' table has shape"):
        loads(_with(pinv, coef=pinv.coef[:, :3]))
    with pytest.raises(ModelError, match="'u_start' table has"):
        loads(_with(pinv, u_start=pinv.u_start[:-1]))
    with pytest.raises(ModelError, match="'u_start' table must not decrease"):
        loads(_with(pinv, u_start=pinv.u_start[::-1].copy()))
    with pytest.raises(ModelError, match="'points' table"):
        loads(_with(ratio, points=np.zeros((3, 5))))


def test_a_missing_table_is_named(histogram):
    arrays = _arrays(histogram)
    del arrays["table.keep"]
    with pytest.raises(ModelError, match="'keep' table is missing"):
        loads(_pack(arrays))


@pytest.mark.parametrize("cut", [0, 10, 200, -50])
def test_truncated_and_empty_files_are_refused(pinv, cut):
    blob = dumps(pinv)
    with pytest.raises(ModelError, match="path"):
        loads(blob[:cut])


def test_wrong_metadata_is_refused(pinv, rejection):
    with pytest.raises(ModelError, match="unknown sampler class"):
        loads(_with_meta(pinv, lambda m: m.update({"class": "Nope"})))
    with pytest.raises(ModelError, match="u_end"):
        loads(_with_meta(pinv, lambda m: m["method_meta"].update({"u_end": "x"})))
    with pytest.raises(ModelError, match="FL"):
        loads(_with_meta(rejection, lambda m: m["method_meta"].update({"FL": -3})))
    with pytest.raises(ModelError, match="malformed|invalid"):
        loads(_with_meta(pinv, lambda m: m.update({"target": [1, 2]})))
    with pytest.raises(ModelError, match="method_meta|malformed|not a table"):
        loads(_with_meta(pinv, lambda m: m.pop("method_meta")))


def test_deeply_nested_metadata_is_refused(pinv):
    arrays = _arrays(pinv)
    arrays["lifedraw.json"] = np.frombuffer(("[" * 100_000 + "]" * 100_000).encode(), dtype=np.uint8)
    with pytest.raises(ModelError, match="nest"):
        loads(_pack(arrays))
    arrays["lifedraw.json"] = np.frombuffer(("[" * 100 + "]" * 100).encode(), dtype=np.uint8)
    with pytest.raises(ModelError, match="nests deeper"):
        loads(_pack(arrays))


def test_a_huge_npy_header_is_refused(pinv):
    blob = io.BytesIO()
    header = b"{'descr': '<f8', 'fortran_order': False, 'shape': (3,), " + b" " * 200_000 + b"}\n"
    npy = b"\x93NUMPY\x02\x00" + len(header).to_bytes(4, "little") + header + np.zeros(3).tobytes()
    with zipfile.ZipFile(blob, "w") as zf:
        for key, value in _arrays(pinv).items():
            with zf.open(key + ".npy", "w") as fh:
                np.lib.format.write_array(fh, value)
        zf.writestr("table.evil.npy", npy)
    with pytest.raises(ModelError, match="could not be read"):
        loads(blob.getvalue())


def test_a_zip_bomb_is_refused_before_decompressing(pinv):
    blob = io.BytesIO()
    with zipfile.ZipFile(blob, "w", compression=zipfile.ZIP_DEFLATED) as zf:
        for key, value in _arrays(pinv).items():
            with zf.open(key + ".npy", "w") as fh:
                np.lib.format.write_array(fh, value)
        # 600 MiB of zeros announce themselves in the zip directory; they compress to ~600 KB.
        with zf.open("table.bomb.npy", "w", force_zip64=True) as fh:
            chunk = bytes(2**24)
            for _ in range(38):
                fh.write(chunk)
    with pytest.raises(ModelError, match="MiB of tables"):
        loads(blob.getvalue())


def test_good_files_still_load_for_every_method(pinv, rejection, mixture, histogram, ratio):
    for sampler in (pinv, rejection, mixture, histogram, ratio):
        again = loads(dumps(sampler))
        assert np.array_equal(again.sample(2000, 5), sampler.sample(2000, 5))


@pytest.mark.parametrize("use_jit", [True, False])
def test_inverse_cdf_kernel_cannot_index_outside_damaged_tables(pinv, use_jit):
    if use_jit and not kernels.HAVE_JIT:
        pytest.skip("Numba not installed")
    bad_guide = np.full(pinv.guide.size, 10**9, dtype=np.int32)
    u = np.random.default_rng(2).random(1000)
    x = kernels.pinv_eval(u, bad_guide, pinv.u_start, pinv._packed, use_jit=use_jit)
    assert np.all(np.isfinite(x))
    bad_guide[:] = -10**9
    x2 = kernels.pinv_eval(u, bad_guide, pinv.u_start, pinv._packed, use_jit=use_jit)
    assert np.all(np.isfinite(x2))


def test_the_clamped_kernels_agree_with_their_numpy_twins_on_damaged_tables(pinv):
    if not kernels.HAVE_JIT:
        pytest.skip("Numba not installed")
    u = np.random.default_rng(3).random(5000)
    for value in (10**9, -10**9):
        guide = np.full(pinv.guide.size, value, dtype=np.int32)
        np.testing.assert_allclose(kernels.pinv_eval(u, guide, pinv.u_start, pinv._packed),
                                   kernels.pinv_eval(u, guide, pinv.u_start, pinv._packed, use_jit=False),
                                   rtol=1e-15)


def test_the_rejection_kernel_clamps_a_damaged_guide(rejection):
    if not kernels.HAVE_JIT:
        pytest.skip("Numba not installed")
    n = 2000
    rng = np.random.default_rng(4)
    lists = (np.empty(n, dtype=np.int64), np.empty(n), np.empty(n), np.empty(n), np.empty(n, dtype=np.int64),
             np.empty(n, dtype=np.int8))
    for value in (10**9, -10**12):
        guide = np.full(rejection._guide.size, value, dtype=np.int64)
        out = rng.random(n)
        counts = kernels.hat_slots(out, rejection.cum, guide, rejection.total, rejection._last,
                                   rejection._table, *lists)
        assert counts.sum() == n
        lo, hi = rejection.target.support
        assert np.all((out >= lo) & (out <= hi))


# ---- densities with infinite mass ----------------------------------------------------------------
# Reference: the comparison test with the integral of 1/t (any calculus text, e.g. Apostol,
# Calculus I, 10.21): the area over (0, inf) is finite only if t*f(t) -> 0; a pole
# (t - lo)**alpha at a finite end is integrable only for alpha > -1.

@pytest.mark.parametrize("expr", ["1", "t/(1+t)", "exp(-t)+1e-20", "when(t<1, 1, 1e-10)"])
def test_a_density_with_infinite_area_is_refused_with_the_reason(expr):
    with pytest.raises(ModelError, match="area under it is infinite") as info:
        lifedraw.density_formula(expr, (0, math.inf))
    assert "tolerance" not in str(info.value)


def test_infinite_area_toward_minus_infinity_and_at_a_pole_is_refused():
    with pytest.raises(ModelError, match="lower end"):
        lifedraw.density_formula("1/(1 + exp(t))", (-math.inf, 0))
    with pytest.raises(ModelError, match="pole that is not integrable"):
        lifedraw.density_formula("1/t", (0, 1))


def test_integrable_tails_and_poles_are_still_accepted():
    # Closed forms: integral of t**-0.5 over (0, 1) is 2; of exp(-t**2) over R is sqrt(pi);
    # of (1 + t)**-1.5 over (0, inf) is 2 (a heavy tail, t*f(t) -> 0 slowly).
    assert lifedraw.density_formula("t**-0.5", (0, 1)).area == pytest.approx(2.0, rel=1e-10)
    assert lifedraw.density_formula("exp(-t**2)", (-math.inf, math.inf)).area == pytest.approx(
        math.sqrt(math.pi), rel=1e-10)
    assert lifedraw.density_formula("(1 + t)**-1.5", (0, math.inf)).area == pytest.approx(2.0, rel=1e-9)


def test_a_density_scaled_into_subnormal_numbers_is_refused():
    with pytest.raises(ModelError, match="multiply the formula by a constant"):
        lifedraw.density_formula("1e-320*exp(-t)", (0, math.inf))


# ---- field data: product-limit in O(n log n), flags that are not flags ----------------------------

def _field_sample(n, seed):
    rng = np.random.default_rng(seed)
    times = np.round(rng.weibull(1.5, n) * 1000.0, 1)         # rounding makes many ties
    censored = rng.random(n) < 0.3
    return times, censored


@pytest.mark.parametrize("n, seed", [(50, 1), (2000, 2), (100_000, 3)])
def test_product_limit_matches_scipy_ecdf(n, seed):
    # Reference: scipy.stats.ecdf on right-censored data (the Kaplan-Meier estimator).
    from scipy import stats
    times, censored = _field_sample(n, seed)
    km = lifedraw.failure_times(times, censored)
    ref = stats.ecdf(stats.CensoredData.right_censored(times, censored))
    np.testing.assert_allclose(km.km_survival, ref.sf.evaluate(km.failure_times), rtol=0, atol=1e-12)


def test_a_million_records_with_a_suspension_last_complete():
    # Was O(n^2) (10^6 never finished); now one sort. No timing assert: the suite's
    # run time shows it (about a second here).
    times, censored = _field_sample(1_000_000, 4)
    censored[np.argmax(times)] = True
    km = lifedraw.failure_times(times, censored)
    assert km.tail_mass > 0 and km.failure_times.size > 1000


@pytest.mark.parametrize("flags", [["no", "yes", "no"], [0, float("nan"), 1], [0, 2, 1]])
def test_censoring_flags_that_are_not_flags_are_refused(flags):
    with pytest.raises(ModelError, match="censored"):
        lifedraw.failure_times([10.0, 20.0, 30.0], flags)
    with pytest.raises(ModelError, match="censored"):
        engine.fit_family("weibull", [10.0, 20.0, 30.0], flags)


# ---- output files: atomic, never silently replaced, checked before the work ------------------------

from lifedraw.cli.main import main as cli  # noqa: E402


def test_sample_refuses_to_replace_a_file_without_force(tmp_path, capsys):
    out = tmp_path / "draws.npy"
    out.write_bytes(b"precious")
    assert cli(["sample", "gearbox-wearout", "-n", "1000", "-o", str(out)]) == 2
    assert "already exists" in capsys.readouterr().err and out.read_bytes() == b"precious"
    assert cli(["sample", "gearbox-wearout", "-n", "1000", "--seed", "3", "-o", str(out), "--force"]) == 0
    assert np.load(out).shape == (1000,)
    assert [p.name for p in tmp_path.iterdir()] == ["draws.npy"]         # no temporary left behind


@pytest.mark.parametrize("where, words", [
    ("missing/x.npy", "does not exist"),
    ("x.parquet", "unknown file type"),
    (".", "is a folder"),
])
def test_a_bad_destination_is_one_clear_line_before_any_work(tmp_path, capsys, monkeypatch, where, words):
    from lifedraw.engine import sampling
    monkeypatch.setattr(sampling, "fit", lambda *a, **k: pytest.fail("the model was built before the check"))
    assert cli(["sample", "gearbox-wearout", "-o", str(tmp_path / where)]) == 2
    err = capsys.readouterr().err
    assert words in err and "Traceback" not in err


def test_an_unwritable_folder_is_refused(tmp_path, capsys):
    import os
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        if os.access(folder, os.W_OK):
            pytest.skip("running as a user who may write anywhere (root)")
        assert cli(["sample", "gearbox-wearout", "-o", str(folder / "x.npy")]) == 2
        assert "not writable" in capsys.readouterr().err
    finally:
        folder.chmod(0o700)


def test_a_write_that_fails_midway_keeps_the_old_file(tmp_path):
    from lifedraw.engine.output_files import write_atomically
    out = tmp_path / "report.html"
    out.write_text("old, whole")

    def dies(fh):
        fh.write(b"half a new fil")
        raise OSError(28, "No space left on device")

    with pytest.raises(ModelError, match="No space left"):
        write_atomically(out, dies)
    assert out.read_text() == "old, whole"
    assert [p.name for p in tmp_path.iterdir()] == ["report.html"]


@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o077, 0o600)])
def test_an_output_gets_the_permissions_the_users_umask_gives(tmp_path, umask, mode):
    # As a file made by open() (POSIX: mode 0666 less the umask): a report or shard written through a
    # temporary file came out private (0600) whatever the umask, so others could not read it.
    import os
    import stat

    from lifedraw.engine.output_files import write_atomically
    if os.name != "posix":
        pytest.skip("POSIX permissions")
    old = os.umask(umask)
    try:
        out = write_atomically(tmp_path / "report.html", "<p>shared</p>")
    finally:
        os.umask(old)
    assert stat.S_IMODE(out.stat().st_mode) == mode


def test_report_refuses_an_existing_file_before_building(tmp_path, capsys):
    out = tmp_path / "r.html"
    out.write_text("keep me")
    assert cli(["report", "gearbox-wearout", "-o", str(out)]) == 2
    assert "already exists" in capsys.readouterr().err and out.read_text() == "keep me"


def test_scenario_save_is_atomic_and_asks_before_replacing(tmp_path):
    from lifedraw.engine.scenarios import load_scenario
    sc = load_scenario("gearbox-wearout")
    path = sc.save(tmp_path / "mine.toml")
    with pytest.raises(ModelError, match="already exists"):
        sc.save(path)
    sc.save(path, overwrite=True)
    assert load_scenario(path).title == sc.title


@pytest.mark.parametrize("args", [["--seed", "-1"], ["--seed", "ten"], ["-n", "inf"], ["-n", "1.5"]])
def test_bad_seeds_and_sizes_on_the_command_line_are_usage_errors(tmp_path, capsys, args):
    with pytest.raises(SystemExit) as info:
        cli(["sample", "gearbox-wearout", *args, "-o", str(tmp_path / "x.npy")])
    assert info.value.code == 2
    assert "Traceback" not in capsys.readouterr().err


# ---- scenario files ------------------------------------------------------------------------------

from lifedraw.engine.scenarios import scenario_from_toml  # noqa: E402

GOOD = '''title = "t"
[model]
kind = "family"
family = "weibull"
params = { shape = 2.0, scale = 10.0 }
'''


@pytest.mark.parametrize("extra, field, words", [
    ("[run]\nsample_sise = 10\n", "run.sample_sise", "did you mean 'sample_size'"),
    ("[run]\nsed = 4\n", "run.sed", "did you mean 'seed'"),
    ("titel = 'x'\n", "titel", "did you mean 'title'"),
    ("[run]\nseed = 1.5\n", "run.seed", "whole number"),
    ("[run]\nseed = -1\n", "run.seed", "between"),
    ("[run]\nsample_size = inf\n", "run.sample_size", "whole number"),
    ("[run]\nsample_size = '100'\n", "run.sample_size", "whole number"),
    ("[run]\nmission_times = 5\n", "run.mission_times", "list"),
    ("run = 5\n", "run", "must be a table"),
    ("parameters = [1, 2]\n", "parameters", "must be a table"),
    ("story = 7\n", "story", "must be text"),
])
def test_malformed_scenario_tables_name_the_key(extra, field, words):
    text = extra + GOOD if not extra.startswith("[") else GOOD.replace("[model]", extra + "[model]")
    with pytest.raises(ModelError) as info:
        scenario_from_toml(text)
    assert info.value.field == field and words in info.value.reason


@pytest.mark.parametrize("blob, words", [
    (GOOD.encode("utf-16"), "UTF-16"),
    (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "not UTF-8"),
    (b"title = 'x'\x00", "NUL"),
    (b"x = " + b"[" * 5000 + b"]" * 5000, "too deeply"),
    (("x = " + "[" * 100 + "]" * 100 + "\n" + GOOD).encode(), "deeper than"),
])
def test_binary_foreign_and_deep_scenario_files_are_refused(blob, words):
    with pytest.raises(ModelError, match=words):
        scenario_from_toml(blob)


def test_a_model_of_the_wrong_shape_is_a_model_error():
    with pytest.raises(ModelError, match="model"):
        scenario_from_toml(GOOD.replace("params = { shape = 2.0, scale = 10.0 }", "params = [1, 2]"))


def test_a_file_where_the_folder_belongs_is_refused(tmp_path, capsys):
    (tmp_path / "afile").write_text("x")
    assert cli(["sample", "gearbox-wearout", "-o", str(tmp_path / "afile" / "x.npy")]) == 2
    assert "is not a folder" in capsys.readouterr().err


# ---- shards: a checksum per shard, verified on resume and on reading ------------------------------

from lifedraw.engine.generate import generate, open_shards, read_manifest  # noqa: E402

SHARD_N, SHARD_CHUNK = 12_000, 4_000


@pytest.fixture(scope="module")
def weibull_fit():
    return engine.fit(lifedraw.family("weibull", shape=2.0, scale=100.0))


def _shards(weibull_fit, out, seed=7):
    generate(weibull_fit, SHARD_N, chunk=SHARD_CHUNK, seed=seed, out=out)
    return np.concatenate([np.load(out / f"draws-{i:06d}.npy") for i in range(3)])


def _flip_a_byte(path, at=-16):
    blob = bytearray(path.read_bytes())
    blob[at] ^= 0x01
    path.write_bytes(bytes(blob))


def test_the_manifest_records_a_checksum_per_shard(weibull_fit, tmp_path):
    import hashlib
    _shards(weibull_fit, tmp_path / "a")
    checksums = read_manifest(tmp_path / "a")["checksums"]
    assert sorted(checksums) == ["0", "1", "2"]
    # Reference: hashlib's sha256 of the shard's float64 values as numpy stores them.
    draws = np.load(tmp_path / "a" / "draws-000001.npy")
    assert checksums["1"] == hashlib.sha256(draws.astype("<f8").tobytes()).hexdigest()


def test_a_flipped_byte_stops_reading_naming_the_shard(weibull_fit, tmp_path):
    out = tmp_path / "a"
    _shards(weibull_fit, out)
    _flip_a_byte(out / "draws-000001.npy")
    x = open_shards(out)
    with pytest.raises(ModelError, match="draws-000001.npy does not match the checksum"):
        x.compute(scheduler="threads")


def test_a_shard_copied_from_another_seed_is_caught(weibull_fit, tmp_path):
    right = _shards(weibull_fit, tmp_path / "a", seed=7)
    _shards(weibull_fit, tmp_path / "b", seed=8)
    (tmp_path / "a" / "draws-000002.npy").write_bytes((tmp_path / "b" / "draws-000002.npy").read_bytes())
    with pytest.raises(ModelError, match="draws-000002.npy"):
        open_shards(tmp_path / "a").compute(scheduler="threads")
    # Resuming rebuilds exactly that shard, after which the numbers are the original ones.
    x = generate(weibull_fit, SHARD_N, chunk=SHARD_CHUNK, seed=7, out=tmp_path / "a")
    np.testing.assert_array_equal(x.compute(scheduler="threads"), right)


def test_nan_and_negative_values_in_a_shard_are_named(weibull_fit, tmp_path):
    from lifedraw.engine.generate import load_shard
    out = tmp_path / "a"
    _shards(weibull_fit, out)
    for value, words in ((np.nan, "nan"), (-3.0, "-3.0")):
        bad = np.load(out / "draws-000000.npy")
        bad[5] = value
        np.save(tmp_path / "bad.npy", bad)
        with pytest.raises(ModelError, match=f"bad.npy holds {words}"):
            load_shard(str(tmp_path / "bad.npy"), None, (0.0, math.inf))


@pytest.mark.parametrize("text", ["", "[]", "{\"format\": \"lifedraw-shards\", \"version\": 2, \"n\": \"x\"}",
                                  "[" * 100_000])
def test_a_malformed_manifest_is_a_model_error(weibull_fit, tmp_path, text):
    out = tmp_path / "a"
    _shards(weibull_fit, out)
    (out / "manifest.json").write_text(text)
    with pytest.raises(ModelError, match="manifest.json"):
        open_shards(out)
    with pytest.raises(ModelError, match="manifest.json"):
        generate(weibull_fit, SHARD_N, chunk=SHARD_CHUNK, seed=7, out=out)


# ---- systems nested beyond reason ---------------------------------------------------------------

def test_a_3000_deep_system_table_is_refused():
    from lifedraw.engine.systems import system_from_spec
    spec = {"kind": "family", "family": "exponential", "params": {"scale": 10.0}}
    for _ in range(3000):
        spec = {"kind": "series", "parts": [spec]}
    with pytest.raises(ModelError, match="deeper than"):
        system_from_spec(spec)


def test_a_3000_deep_system_of_objects_is_refused():
    from lifedraw.engine.systems import series
    block = series([lifedraw.family("exponential", scale=10.0)])
    with pytest.raises(ModelError, match="levels deep"):
        for _ in range(3000):
            block = series([block])


# ---- formulas: size and derivative bounded, flat sums are not "nested" ---------------------------

from lifedraw.engine.formula import Formula  # noqa: E402


def test_a_flat_sum_of_101_terms_is_not_called_nested():
    # Reference: arithmetic; 101 * t at t = 2 is 202, and t - t - ... (300 terms) at 1 is -298.
    f = Formula.parse("+".join(["t"] * 101))
    assert f(np.array([2.0]))[0] == 202.0
    assert Formula.parse("-".join(["t"] * 300))(np.array([1.0]))[0] == -298.0
    assert Formula.parse("*".join(["t"] * 101))(np.array([1.01]))[0] == pytest.approx(1.01 ** 101, rel=1e-13)


def test_real_nesting_beyond_the_limit_is_still_named():
    with pytest.raises(ModelError, match="nests more than 100 levels"):
        Formula.parse("sin(" * 150 + "t" + ")" * 150)


def test_a_derivative_that_explodes_is_refused_quickly():
    # 95 nested sinh: the second derivative would grow without bound; refused with the reason.
    f = Formula.parse("sinh(" * 95 + "t" + ")" * 95)
    with pytest.raises(ModelError, match="exact derivative of this formula grows"):
        f.derivative().derivative()
    with pytest.raises(ModelError, match="derivative"):
        lifedraw.cdf_formula("1 - exp(-" + "sinh(" * 60 + "t" + ")" * 60 + ")")


# ---- raw exceptions that are now ModelErrors -------------------------------------------------------

@pytest.fixture(scope="module")
def weibull_sampler():
    return engine.fit(lifedraw.family("weibull", shape=2.0, scale=10.0))


@pytest.mark.parametrize("call, field", [
    (lambda s: s.sample(10**400), "n"),
    (lambda s: s.sample(float("inf")), "n"),
    (lambda s: s.sample(10, -1), "seed"),
    (lambda s: s.sample(10, "abc"), "seed"),
    (lambda s: s.sample(10, 1.5), "seed"),
    (lambda s: s.geometry(10**10), "n_points"),
    (lambda s: s.geometry(0), "n_points"),
    (lambda s: engine.fit(s.target, "inversion", foo=3), "foo"),
    (lambda s: lifedraw.family("weibull", shape=10**400, scale=1.0), "shape"),
    (lambda s: engine.fit_family("normal", [5.0, 5.0, 5.0]), "times"),
    (lambda s: engine.series([s.target]).sample(10, -3), "seed"),
], ids=["n 10**400", "n inf", "seed -1", "seed text", "seed 1.5", "geometry 1e10", "geometry 0",
        "unknown fit option", "shape 10**400", "normal fit of equal times", "system seed -1"])
def test_raw_exceptions_became_model_errors(weibull_sampler, call, field):
    with pytest.raises(ModelError) as info:
        call(weibull_sampler)
    assert info.value.field == field


# ---- silent wrong values, now refused or right -----------------------------------------------------

@pytest.mark.parametrize("family, params, field", [
    ("weibull", {"shape": 0.001, "scale": 1.0}, "shape"),
    ("loglogistic", {"shape": 1e-300, "scale": 1.0}, "shape"),
    ("lognormal", {"mu": 800.0, "sigma": 1.0}, "mu"),
])
def test_parameters_whose_draws_overflow_are_refused(family, params, field):
    # Weibull shape 0.001 drew 13% infinities: its 1 - 2^-53 quantile, (53 ln 2)^1000, is beyond 1.8e308.
    with pytest.raises(ModelError, match="beyond double precision") as info:
        lifedraw.family(family, **params)
    assert info.value.field == field


def test_moderate_shapes_still_draw_finite_values():
    x = engine.fit(lifedraw.family("weibull", shape=0.05, scale=1.0)).sample(10_000, 1)
    assert np.all(np.isfinite(x))


def test_gamma_mean_with_a_huge_shape():
    # Gamma mean = shape * scale (closed form; scipy.stats.gamma(1e20).mean() agrees).
    from scipy import stats
    assert lifedraw.family("gamma", shape=1e20, scale=1.0).mean() == pytest.approx(stats.gamma(1e20).mean(), rel=1e-12)


def test_histogram_counts_near_the_largest_double():
    assert np.allclose(lifedraw.binned_counts([0, 1, 2], [1e308, 1e308]).probabilities, [0.5, 0.5])


def test_a_cdf_with_a_narrow_dip_is_refused():
    with pytest.raises(ModelError, match="decreases near t = 0.99"):
        lifedraw.cdf_formula("1-exp(-t) - 0.05*exp(-((t-1)/0.001)**2)")


def test_a_cdf_with_a_jump_is_named_not_blamed_on_the_tolerance():
    with pytest.raises(ModelError, match="jumps by 0.516") as info:
        engine.fit(lifedraw.cdf_formula("when(t<1, 0.3*t, 1-0.5*exp(-t))"))
    assert "tolerance" not in str(info.value)


def test_saving_a_sampler_into_a_missing_folder_is_a_model_error(weibull_sampler, tmp_path):
    with pytest.raises(ModelError, match="could not write"):
        weibull_sampler.save(tmp_path / "missing" / "s.lds")
    weibull_sampler.save(tmp_path / "s.lds")
    assert [p.name for p in tmp_path.iterdir()] == ["s.lds"]      # no temporary left behind
