"""`make bench`: lifedraw against reference generators, side by side in one process.

Single thread (thread-count variables set before numpy loads), same targets and
sizes, alternating runs, medians of several repetitions; results as ratios
lifedraw/reference, written to bench/results.md. Not part of `make test`.
"""
from __future__ import annotations

import os

_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS")
_THREAD_VARIABLES_BEFORE = {_var: os.environ.get(_var) for _var in _THREAD_VARIABLES}
for _var in _THREAD_VARIABLES:
    os.environ[_var] = "1"

import argparse
import datetime
import json
import math
import platform
import statistics
import subprocess
import sys
import time
from importlib import metadata
from pathlib import Path

import numpy as np
from scipy import stats
from scipy.stats import sampling

import lifedraw
from lifedraw import engine
from lifedraw.engine import Target
from lifedraw.engine.methods import METHODS

from bench.setup_time import setup_rows

HERE = Path(__file__).resolve().parent
N_DRAWS = 10**7
REPEATS = 5


# ---- the formula targets, written twice: our formula text, and a plain scalar pdf for the references
def _targets():
    """(name, lifedraw target builder, reference pdf (scalar), dpdf (scalar) or None, mode, support)."""
    out = []
    # 1. generalised gamma: f ~ t^(k-1) exp(-(t/s)^p)
    k, p, s = 2.5, 1.6, 1.0
    out.append(("generalised gamma",
                lambda: lifedraw.density_formula("t**(k - 1)*exp(-(t/s)**p)", (0, math.inf), dict(k=k, p=p, s=s)),
                lambda x: x ** (k - 1) * math.exp(-((x / s) ** p)),
                lambda x: (x ** (k - 2) * math.exp(-((x / s) ** p))) * ((k - 1) - p * (x / s) ** p),
                ((k - 1) / p) ** (1 / p) * s, (0, math.inf)))
    # 2. bathtub mixture written as one density formula, with a pole at 0 (shape 0.5)
    w1, w2, w3, b3, e3 = 0.1, 0.3, 0.6, 4.0, 3.0
    out.append(("bathtub mixture, pole at 0",
                lambda: lifedraw.density_formula("w1*0.5*t**(-0.5)*exp(-t**0.5) + w2*exp(-t)"
                                       " + w3*b3/e3*(t/e3)**(b3 - 1)*exp(-(t/e3)**b3)", (0, math.inf),
                                       dict(w1=w1, w2=w2, w3=w3, b3=b3, e3=e3)),
                lambda x: (w1 * 0.5 * x ** -0.5 * math.exp(-(x ** 0.5)) + w2 * math.exp(-x)
                           + w3 * b3 / e3 * (x / e3) ** (b3 - 1) * math.exp(-((x / e3) ** b3))) if x > 0
                else math.inf,
                None, None, (0, math.inf)))
    # 3. lognormal-like density as a formula
    mu, sg = 1.0, 0.5
    out.append(("lognormal-like formula",
                lambda: lifedraw.density_formula("exp(-(log(t) - mu)**2/(2*sg**2))/t", (0, math.inf), dict(mu=mu, sg=sg)),
                lambda x: math.exp(-((math.log(x) - mu) ** 2) / (2 * sg * sg)) / x if x > 0 else 0.0,
                lambda x: (math.exp(-((math.log(x) - mu) ** 2) / (2 * sg * sg)) / x**2
                           * (-(math.log(x) - mu) / (sg * sg) - 1)) if x > 0 else 0.0,
                math.exp(mu - sg * sg), (0, math.inf)))
    # 4. a hazard-rate formula (Weibull-type wear-out plus a constant rate); H in closed form for the reference
    a, b, c = 1.0, 2.5, 0.05
    out.append(("hazard-rate formula",
                lambda: lifedraw.hazard_formula("a*b*t**(b - 1) + c", (0, math.inf), dict(a=a, b=b, c=c)),
                lambda x: (a * b * x ** (b - 1) + c) * math.exp(-(a * x**b + c * x)),
                None, None, (0, math.inf)))
    return out


class _Dist:
    def __init__(self, pdf, dpdf, mode, support):
        self.pdf = pdf
        if dpdf is not None:
            self.dpdf = dpdf
        self._support = support
        self._mode = mode

    def support(self):
        return self._support


def _median_rate(fn, n=N_DRAWS, repeats=REPEATS):
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn(n)
        times.append(time.perf_counter() - start)
    return n / statistics.median(times)


def _race(ours, theirs, n=N_DRAWS, repeats=REPEATS):
    """Alternate the two generators, so drifts of the machine hit both alike."""
    t_ours, t_theirs = [], []
    ours(min(n, 10**5)); theirs(min(n, 10**5))            # warm-up
    for _ in range(repeats):
        start = time.perf_counter(); ours(n); t_ours.append(time.perf_counter() - start)
        start = time.perf_counter(); theirs(n); t_theirs.append(time.perf_counter() - start)
    return n / statistics.median(t_ours), n / statistics.median(t_theirs)


def _timed(fn, repeats=3):
    best = []
    for _ in range(repeats):
        start = time.perf_counter()
        value = fn()
        best.append(time.perf_counter() - start)
    return value, statistics.median(best)


def bench_inversion(rows):
    for name, build, pdf, dpdf, mode, support in _targets():
        (sampler, setup) = _timed(lambda: engine.fit(build(), "inversion", 1e-10))
        dist = _Dist(pdf, None, mode, support)
        kwargs = {"center": mode} if mode else {}
        try:
            ref, ref_setup = _timed(lambda: sampling.NumericalInversePolynomial(
                dist, u_resolution=1e-10, random_state=np.random.default_rng(1), **kwargs))
        except Exception as err:  # UNU.RAN refuses some targets (e.g. an unbounded density)
            rows.append(dict(section="1. numerical inversion vs NumericalInversePolynomial", target=name,
                             ours=_median_rate(lambda n: sampler.sample(n, 1), repeats=3),
                             note=f"reference failed: {type(err).__name__}: {str(err)[:120]}; "
                                  f"lifedraw u-error {sampler.stats['u_error']:.1e}, set-up {setup * 1e3:.1f} ms"))
            continue
        g1 = np.random.default_rng(11)
        ours, theirs = _race(lambda n: sampler.sample(n, g1), lambda n: ref.rvs(n))
        # Both u-errors measured the same way, against the model's own CDF.
        target = sampler.target
        u = np.sort(np.random.default_rng(3).random(100_000))
        u_ref = float(np.max(np.abs(u - target.cdf(ref.ppf(u)))))
        rows.append(dict(section="1. numerical inversion vs NumericalInversePolynomial", target=name,
                         ours=ours, ref=theirs, ratio=ours / theirs, goal=2.0,
                         note=f"draws/s at u-error {sampler.stats['u_error']:.1e} (lifedraw) vs {u_ref:.1e} "
                              "(reference, measured the same way)"))
        g2, g3 = np.random.default_rng(12), np.random.default_rng(13)
        ours_u, numpy_u = _race(lambda n: sampler.sample(n, g2), lambda n: g3.random(n), repeats=3)
        rows.append(dict(section="1c. numerical inversion vs numpy's uniform fill (Generator.random)", target=name,
                         ours=ours_u, ref=numpy_u, ratio=ours_u / numpy_u, goal=0.3,
                         note="the floor any inversion pays: one uniform per draw"))
        rows.extend(setup_rows(name, lambda: engine.fit(build(), "inversion", 1e-10),
                               lambda: sampling.NumericalInversePolynomial(
                                   dist, u_resolution=1e-10, random_state=np.random.default_rng(1), **kwargs)))


def bench_rejection_and_rou(rows):
    for name, build, pdf, dpdf, mode, support in _targets():
        target = build()
        if "rejection" in METHODS and dpdf is not None:
            try:
                ours_s = engine.fit(target, "rejection")
                dist = _Dist(pdf, dpdf, mode, support)
                ref = sampling.TransformedDensityRejection(dist, mode=mode, random_state=np.random.default_rng(2))
                g = np.random.default_rng(12)
                ours, theirs = _race(lambda n: ours_s.sample(n, g), lambda n: ref.rvs(n))
                rows.append(dict(section="2. rejection vs TransformedDensityRejection", target=name, ours=ours,
                                 ref=theirs, ratio=ours / theirs, goal=1.2,
                                 note=f"acceptance {ours_s.stats['acceptance_rate']:.3f}"))
            except engine.MethodNotApplicable as err:
                rows.append(dict(section="2. rejection vs TransformedDensityRejection", target=name,
                                 note=f"not applicable: {err.reason}"))
            except Exception as err:  # the reference may refuse a target (e.g. not T-concave)
                rows.append(dict(section="2. rejection vs TransformedDensityRejection", target=name,
                                 note=f"reference failed: {type(err).__name__}: {err}"))
        if "ratio-of-uniforms" in METHODS and mode is not None:
            try:
                ours_s = engine.fit(target, "ratio-of-uniforms")
                area = target.area if hasattr(target, "area") else 1.0
                dist = _Dist(pdf, None, mode, support)
                ref = sampling.SimpleRatioUniforms(dist, mode=mode, pdf_area=area,
                                                   random_state=np.random.default_rng(3))
                g = np.random.default_rng(13)
                n_ref = 10**6   # the reference calls a Python pdf per candidate: 10^6 is plenty to time
                ours = _median_rate(lambda n: ours_s.sample(n, g), n=N_DRAWS, repeats=3)
                theirs = _median_rate(lambda n: ref.rvs(n), n=n_ref, repeats=3)
                rows.append(dict(section="2. ratio-of-uniforms vs SimpleRatioUniforms", target=name, ours=ours,
                                 ref=theirs, ratio=ours / theirs, goal=10.0,
                                 note=f"acceptance {ours_s.stats['acceptance_rate']:.3f}, squeeze "
                                      f"{ours_s.stats['squeeze_rate'] or 0:.3f}"))
            except engine.MethodNotApplicable as err:
                rows.append(dict(section="2. ratio-of-uniforms vs SimpleRatioUniforms", target=name,
                                 note=f"not applicable: {err.reason}"))


def bench_normal(rows):
    if "ratio-of-uniforms" not in METHODS:
        return
    s = engine.fit(lifedraw.family("normal", mean=0, sd=1), "ratio-of-uniforms")
    g1, g2 = np.random.default_rng(21), np.random.default_rng(22)
    ours, theirs = _race(lambda n: s.sample(n, g1), lambda n: g2.standard_normal(n))
    rows.append(dict(section="3. Leva normal vs numpy standard_normal (ziggurat)", target="standard normal",
                     ours=ours, ref=theirs, ratio=ours / theirs, goal=0.75,
                     note=f"variant: {s.stats.get('variant', '')}"))


def bench_generic(rows):
    name, build, pdf, dpdf, mode, support = _targets()[0]

    class Generic(stats.rv_continuous):
        def _pdf(self, x):
            return np.vectorize(pdf)(x) / 1.0

    area = build().area
    gen = Generic(a=0.0, name="generic")
    gen._pdf = lambda x: np.vectorize(pdf)(x) / area
    n_generic = 300
    start = time.perf_counter()
    gen.rvs(size=n_generic, random_state=np.random.default_rng(5))
    generic = n_generic / (time.perf_counter() - start)
    sampler = engine.fit(build())
    ours = _median_rate(lambda n: sampler.sample(n, 7), repeats=3)
    rows.append(dict(section="4. against a generic rv_continuous with only _pdf", target=name, ours=ours,
                     ref=generic, ratio=ours / generic, goal=None,
                     note=f"{generic:.0f} samples/s by scipy's generic path"))


def bench_refit(rows):
    fam = []
    for shape in np.linspace(1.5, 3.5, 9):
        _, t = _timed(lambda: engine.fit(lifedraw.family("weibull", shape=shape, scale=1000)), repeats=3)
        fam.append(t)
    form = []
    for k in np.linspace(2.0, 3.0, 5):
        _, t = _timed(lambda: engine.fit(lifedraw.density_formula("t**(k - 1)*exp(-(t/s)**p)", (0, math.inf),
                                                        dict(k=k, p=1.6, s=1.0))), repeats=3)
        form.append(t)
    rows.append(dict(section="5. refit after a slider change", target="Weibull family",
                     ours=statistics.median(fam) * 1e3, ref=20.0, ratio=statistics.median(fam) * 1e3 / 20.0,
                     goal=-1.0, note="milliseconds (goal <= 20 ms)"))
    rows.append(dict(section="5. refit after a slider change", target="density formula",
                     ours=statistics.median(form) * 1e3, ref=100.0, ratio=statistics.median(form) * 1e3 / 100.0,
                     goal=-1.0, note="milliseconds (goal <= 100 ms)"))


def bench_threads(rows):
    """Two threads vs one for n = 2e7 through the chunked generator, and peak memory for 1e8."""
    code = r'''
import os, sys, time, json, resource
import numpy as np, dask
import lifedraw
from lifedraw import engine
from lifedraw.engine.generate import generate
s = engine.fit(lifedraw.density_formula("t**(k - 1)*exp(-(t/s)**p)", (0, float("inf")), dict(k=2.5, p=1.6, s=1.0)))
mode = sys.argv[1]
if mode == "threads":
    out = {}
    # Each compute takes 0.06-0.15 s: eight of each, alternating, and the fastest of each kept (two were
    # too few: 1.62x and 2.15x came out of two runs of the same code).
    for workers in (1, 2) * 8:
        arr = generate(s, 2 * 10**7, chunk=10**6, seed=1)
        start = time.perf_counter()
        with dask.config.set(scheduler="threads", num_workers=workers):
            arr.sum().compute()
        out.setdefault(workers, []).append(time.perf_counter() - start)
    print(json.dumps({k: min(v) for k, v in out.items()}))
elif mode == "buffers":
    import copy, threading
    copies = [copy.deepcopy(s) for _ in range(2)]
    buffers = [np.zeros(10**6) for _ in range(2)]       # touched once: the pages are reused
    def work(k, reps):
        rng = np.random.default_rng(k)
        for _ in range(reps):
            copies[k].sample(buffers[k].size, rng, out=buffers[k])
    def fill(k, reps):                                   # the reference: numpy's own fill, no GIL
        rng = np.random.default_rng(k)
        for _ in range(reps):
            rng.random(out=buffers[k])
    work(0, 1); work(1, 1)
    out = {}
    for workers in (1, 2, 1, 2, 1, 2):
        for name, fn, reps in (("ours", work, 20), ("numpy", fill, 60)):
            threads = [threading.Thread(target=fn, args=(k, reps // workers)) for k in range(workers)]
            start = time.perf_counter()
            for t in threads: t.start()
            for t in threads: t.join()
            out.setdefault(f"{name}{workers}", []).append(time.perf_counter() - start)
    print(json.dumps({k: min(v) for k, v in out.items()}))
else:
    arr = generate(s, 10**8, chunk=10**7, seed=1)
    with dask.config.set(scheduler="threads", num_workers=2):
        arr.mean().compute()
    print(json.dumps({"maxrss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
'''
    env = dict(os.environ)
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
        env[var] = "1"
    try:
        res = json.loads(subprocess.run([sys.executable, "-c", code, "threads"], capture_output=True, text=True,
                                        check=True, env=env, timeout=600).stdout.strip().splitlines()[-1])
        t1, t2 = res["1"], res["2"]
        rows.append(dict(section="6. scaling: two threads vs one (2e7 draws, chunks of 1e6)",
                         target="generalised gamma", ours=2e7 / t2, ref=2e7 / t1, ratio=t1 / t2, goal=1.85,
                         note="draws/s with 2 threads vs 1 thread, fastest of 8 alternating computes each"))
        res = json.loads(subprocess.run([sys.executable, "-c", code, "buffers"], capture_output=True, text=True,
                                        check=True, env=env, timeout=600).stdout.strip().splitlines()[-1])
        t1, t2 = res["ours1"], res["ours2"]
        rows.append(dict(section="6. scaling: two threads vs one (2e7 draws, sample(out=) into a reused 1e6 buffer "
                                 "per thread)", target="generalised gamma", ours=2e7 / t2, ref=2e7 / t1,
                         ratio=t1 / t2, goal=1.85, note="draws/s with 2 threads vs 1 thread, no Dask, no fresh memory"))
        n1, n2 = res["numpy1"], res["numpy2"]
        rows.append(dict(section="6b. the machine's own two-thread scaling: numpy's uniform fill (6e7 uniforms, "
                                 "the same reused buffers, GIL released)", target="numpy Generator.random",
                         ours=6e7 / n2, ref=6e7 / n1, ratio=n1 / n2,
                         note="reference for row 6: what two threads give on this machine for a loop with no "
                              "shared state at all"))
        mem = json.loads(subprocess.run([sys.executable, "-c", code, "memory"], capture_output=True, text=True,
                                        check=True, env=env, timeout=600).stdout.strip().splitlines()[-1])
        rows.append(dict(section="6. peak memory, 1e8 draws in chunks of 1e7", target="generalised gamma",
                         ours=mem["maxrss_mb"], ref=1024.0, ratio=mem["maxrss_mb"] / 1024.0, goal=-1.0,
                         note="MB of peak resident memory (goal < 1024 MB)"))
    except (subprocess.SubprocessError, json.JSONDecodeError, IndexError, KeyError) as err:
        rows.append(dict(section="6. scaling and memory", target="-", note=f"could not run: {err}"))


DASHBOARD_P95_MS = 150.0      # issue 13: slider release -> redraw, p95 (was 250 ms)


def bench_dashboard(rows):
    script = HERE / "dashboard_latency.py"
    if not script.exists():
        return
    for extra, label in (([], "stream paused"), (["--streaming"], "while streaming")):
        try:
            out = subprocess.run([sys.executable, str(script), "--json", "--trials", "20", *extra],
                                 capture_output=True, text=True, timeout=600, check=True,
                                 cwd=HERE.parent).stdout.strip().splitlines()[-1]
            res = json.loads(out)
            rows.append(dict(section="7. dashboard slider-to-redraw latency (headless Chromium)",
                             target=f"{res.get('batch', 50000):,} draws per batch, {label}", ours=res["p95_ms"],
                             ref=DASHBOARD_P95_MS, ratio=res["p95_ms"] / DASHBOARD_P95_MS, goal=-1.0,
                             note=f"p95 {res['p95_ms']:.0f} ms, median {res['median_ms']:.0f} ms over "
                                  f"{res['trials']} releases (goal p95 <= {DASHBOARD_P95_MS:g} ms)"))
        except (subprocess.SubprocessError, json.JSONDecodeError, IndexError, KeyError) as err:
            rows.append(dict(section="7. dashboard latency", target=label, note=f"could not run: {err}"))


LIFE_ROW_NOTE = (
    "Row 8 (`python -m bench.life_billion`) starts both timings from the same lazy array of engine.generate "
    "on 2 local worker processes: the generation reduces the draws on the workers (mean, max, 200-bin "
    "histogram, as bench/generate_billion.py) and `life_summary` computes MTTF, B1/B10/B50 with exact "
    "order-statistic intervals and R(t) at the scenario's mission times. The summary reads the draws once: "
    "the first chunk on each worker places value windows around the wanted ranks and one compiled counting "
    "pass keeps the draws inside them (engine/order_statistics.py, engine/rank_windows.py); before this round "
    "it drew every chunk twice (a histogram pass, then a keeping pass), about 2x the generation's CPU time.")


def bench_life(rows, n=10**9):
    """life_summary of 10^9 lazily generated draws against generating them (bench/life_billion.py)."""
    section = f"8. life_summary of {n:.0e} draws vs generating them (2 local Dask workers)"
    try:
        out = subprocess.run([sys.executable, "-m", "bench.life_billion", "--json", "-n", str(n)],
                             capture_output=True, text=True,
                             timeout=1800, check=True, cwd=HERE.parent).stdout.strip().splitlines()[-1]
        res = json.loads(out)
        rows.append(dict(section=section, target=f"{res['scenario']} (chunks of {res['chunk']:.0e})",
                         ours=res["life_summary_s"], ref=res["generate_s"], ratio=res["ratio"], goal=-1.5,
                         note=f"seconds, medians of {res['repeats']} alternating runs; worker CPU ratio "
                              f"{res['cpu_ratio']:.2f}; {res['passes']} pass{'' if res['passes'] == 1 else 'es'} "
                              "over the draws"))
    except (subprocess.SubprocessError, json.JSONDecodeError, IndexError, KeyError) as err:
        rows.append(dict(section=section, target="-", note=f"could not run: {err}"))


REPORT_SCENARIO = "gearbox-wearout"
REPORT_SECONDS = 3.0          # issue 13: the whole `lifedraw report` command
REPORT_BYTES = 600_000        # ... and the file it writes


def bench_report(rows, runs: int = 3):
    """`lifedraw report` as a user runs it: a fresh process each time (imports, drawing, checks, the method
    comparison, the fleet study, rendering and packing the plots, writing the file), median wall time.
    The command draws its pictures in a second process when it may use two cores; alternating runs held
    to one core (the pictures then drawn in the same process) show what the second process buys."""
    import resource
    import tempfile
    # The user's environment, not this script's single-thread settings.
    env = {k: v for k, v in os.environ.items() if k not in _THREAD_VARIABLES}
    env.update({k: v for k, v in _THREAD_VARIABLES_BEFORE.items() if v is not None})
    one_core = hasattr(os, "sched_setaffinity") and len(os.sched_getaffinity(0)) > 1
    walls, cpus, single, size = [], [], [], None
    load = os.getloadavg()[0]

    def run_once(out, pin):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        start = time.perf_counter()
        subprocess.run([sys.executable, "-m", "lifedraw", "report", REPORT_SCENARIO, "-o", str(out), "--force"],
                       check=True, capture_output=True, env=env, cwd=HERE.parent, timeout=300,
                       preexec_fn=(lambda: os.sched_setaffinity(0, {min(os.sched_getaffinity(0))})) if pin else None)
        wall = time.perf_counter() - start
        after = resource.getrusage(resource.RUSAGE_CHILDREN)   # the command and its picture process
        return wall, after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime

    try:
        with tempfile.TemporaryDirectory() as folder:
            out = Path(folder) / "report.html"
            for _ in range(runs):
                wall, cpu = run_once(out, pin=False)
                walls.append(wall)
                cpus.append(cpu)
                size = out.stat().st_size
                if one_core:
                    single.append(run_once(out, pin=True)[0])
    except (subprocess.SubprocessError, OSError) as err:
        rows.append(dict(section="9. report", target=REPORT_SCENARIO, note=f"could not run: {err}"))
        return
    wall, cpu = statistics.median(walls), statistics.median(cpus)
    alone = (f"; held to one core, alternating: {statistics.median(single):.2f} s" if single else "")
    rows.append(dict(section="9. report: the whole `lifedraw report` command", target=REPORT_SCENARIO,
                     ours=wall, ref=REPORT_SECONDS, ratio=wall / REPORT_SECONDS, goal=-1.0,
                     note=f"seconds, median of {runs} fresh processes (CPU of both processes {cpu:.2f} s; runs "
                          f"{', '.join(f'{w:.2f}' for w in walls)} s{alone}; load {load:.2f} before); "
                          f"goal <= {REPORT_SECONDS:g} s"))
    rows.append(dict(section="9. report: size of the file", target=REPORT_SCENARIO, ours=size / 1e3,
                     ref=REPORT_BYTES / 1e3, ratio=size / REPORT_BYTES, goal=-1.0,
                     note=f"kB, standalone (BokehJS and plots gzip-packed inside); goal <= {REPORT_BYTES / 1e3:g} kB"))


def _machine() -> str:
    cpu = "unknown CPU"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    versions = ", ".join(f"{p} {metadata.version(p)}" for p in ("numpy", "scipy", "numba", "dask", "panel")
                         if _has(p))
    return (f"{platform.system()} {platform.machine()}, {cpu}, {os.cpu_count()} cores; "
            f"Python {platform.python_version()}; {versions}; JIT kernels: "
            f"{'on' if engine.kernels.HAVE_JIT else 'off'}")


def _has(pkg):
    try:
        metadata.version(pkg)
        return True
    except metadata.PackageNotFoundError:
        return False


def _verdict(row) -> str:
    goal = row.get("goal")
    if goal is None or "ratio" not in row:
        return ""
    if goal < 0:      # a "lower is better" row: ratio at most -goal (measured / limit when -goal is 1)
        return "met" if row["ratio"] <= -goal else "MISSED"
    return "met" if row["ratio"] >= goal else "MISSED"


# What limits each goal when it is missed (measured and reasoned, kept beside the numbers).
GAPS = {
    "1": ("each draw is one uniform (numpy's fill, straight into the output) and one pass of the compiled "
          "loop over it: a guide-table look-up with 32 cells per piece (a step past the cell's first piece is "
          "then needed about once in 32 draws) and the degree-5 polynomial by Estrin's scheme (three independent "
          "pairs and two squarings, a shorter dependency chain than Horner's rule), about 4 ns a draw; a fresh "
          "output array also costs its page faults, which the reference pays as well. A ratio under the goal "
          "means the machine was busy (see the load averages below)."),
    "1c": ("the floor: numpy's fill writes about one uniform per 2-3 ns; the inversion adds its compiled pass "
           "(about 4 ns, see row 1)."),
    "1b": ("set-up is Python driving vectorised passes, each over all pieces at once: the model "
           "(probes, a 64-piece adaptive Gauss-Legendre partition of the cumulative integral, one pass over the "
           "integrand per round, then Chebyshev series of every piece so that F and R cost a short compiled sum, "
           "engine/piece_series.py, cut towards a tail only as deep as its masses need, the new parts evaluated "
           "and integrated in one pass) and the inversion (a scan of F and R at the edges of that series, which "
           "the model holds already, for the tails' cut, the median and a first partition near the quantiles; "
           "then two fitting rounds of two passes each, one call of the model per pass, at the test points of "
           "fitted pieces only). The series sums, the piece fitting and the guide table are compiled kernels; the "
           "Gauss-Jacobi rule of a fractional-power start is one numpy eigh call. What is left is some 5,000-6,000 "
           "compiled series sums (15-20 ns each), about 13 calls of the formula on arrays (0.1-0.3 ms) and the "
           "fixed cost of a couple of hundred numpy calls around them (1-20 us each), beside UNU.RAN's compiled "
           "loop; the largest single step is the model's series (about a quarter to a third of the set-up: one "
           "pass over 24 Chebyshev points of every piece, then the parts cut towards the ends). Building that "
           "series adaptively from the start, so that one set of evaluations gives both the integral and the "
           "series, was tried and dropped: the tail of a piece's Chebyshev coefficients accepted a far-tail piece "
           "that the Gauss-Legendre halving splits, and R(t) = 1e-12 of a gamma formula with a pole then came out "
           "3.7e-7 off (relative; the test asks 1e-10). Cold and warm differ by the parse only: every number, the "
           "Gauss-Jacobi rule included, is computed afresh for every model (no numbers are kept between models, "
           "so a rebuilt model never depends on what was built before it)."),
    "2": ("rejection now runs slot by slot in place: the output's uniforms become candidates in one compiled "
          "pass (immediate acceptance below each row's squeeze floor, flat steps with no logarithm), only the "
          "~3% undecided candidates are listed for the squeeze and density tests, and the ~1.3% rejected slots "
          "take their next candidates together in a much smaller pass; no candidate arrays and no gathering "
          "pass. A ratio under the goal means the machine was busy."),
    "3": ("Leva's method needs two uniforms per candidate and accepts 73% of them (2.74 uniforms per draw, "
          "Leva 1992), while numpy's ziggurat needs about one 64-bit draw per deviate; the uniforms alone cost "
          "about 5 ns a draw (numpy's fill). The candidates are drawn in cache-sized blocks (numpy's fill of "
          "65,536 uniforms) and tested by a compiled kernel in two passes, branch-free arithmetic first and the "
          "accept/reject walk second, which halved the cost of the test. A ratio under the goal means the "
          "machine was busy."),
    "6": ("row 6b gives the machine's own ceiling: numpy's uniform fill into reused buffers, which shares "
          "nothing between the two threads and releases the GIL; a ratio under the goal while row 6b is near it "
          "means the second core was busy part of the time."),
    "6. scaling: two threads vs one (2e7 draws, chunks of 1e6)": (
          "every compute through Dask pays its own fixed cost (building, optimising and scheduling the 20 draw "
          "tasks and their sums: about 10 ms, measured with 10-draw chunks, on one thread or two) against about "
          "120 ms of drawing on one thread; that serial part holds two threads to about 1.75-1.8x (1.72-1.79x "
          "in three runs of eight computes each; with two computes each the same code gave 1.62x and 2.15x). "
          "The row measures Dask's overhead as much as the sampler: with reused buffers and no Dask the same "
          "sampler scales as numpy's own fill (row 6b). Each chunk draws from a working copy of the unpacked sampler "
          "(microseconds); before this round it drew from a deep copy that rebuilt the model from its file, "
          "3.4 ms per chunk under the GIL, which held this row to 1.3x. Fresh chunk arrays cost no page faults "
          "here (measured: the allocator reuses the freed chunks)."),
    "2. ratio-of-uniforms vs SimpleRatioUniforms": (
          "on the polygon envelope each round of candidates is one compiled pass (kernels.rou_polygon: the "
          "triangle pick, the fold, x = v/u and the squeeze test), and only the ~1% of candidates outside the "
          "squeeze reach the density; a ratio under the goal means the machine was busy. (The rectangle "
          "envelope, used where no polygon is built, is vectorised numpy.)"),
    "8": ("the summary draws every chunk as the generation does and adds one compiled counting pass per "
          "chunk (about 3-4 ns a draw against 40-60 ns to draw it) and a sort of the first chunk on each worker; "
          "a ratio above the goal means the machine was busy (compare the worker CPU ratio in the notes) or the "
          "first chunks misled the windows and the radix select ran two more passes (the notes count the passes)."),
    "7": ("what a release costs now, measured by aligning the browser's and the server's clocks on this "
          "machine: the slider's release travelling from headless Chromium to the server (about 40-60 ms), the "
          "refit with its first batch of 50,000 draws and HoloViews redrawing the histogram off the page (about "
          "40 ms; MirroredPlot copies the new values onto the page, so Bokeh no longer walks the page's ~640 "
          "models after each redraw), and Chromium applying the change (20-40 ms). While the stream runs, a "
          "release can also wait for the one piece of work in progress (a batch or one secondary picture, "
          "about 20-60 ms). Measured while other processes shared the 2 cores (see the load averages below)."),
    "9": ("the command is two processes side by side (dashboard/picture_process.py): this one imports the "
          "engine (scipy, numpy, numba; about 1 s of CPU) and computes the draws, checks, method comparison and "
          "fleet study (about 0.5 s), while the second, started first, imports HoloViews, Bokeh and Panel and "
          "sets up HoloViews' Bokeh backend (about 1 s), then turns each picture into Bokeh models as its data "
          "arrives (16 pictures, about 1 s) and serialises them (0.3 s). The pictures' half is the longer and "
          "sets the time; pandas is no longer loaded (HoloViews keeps the plain arrays it is given) and the cyclic "
          "garbage collector pauses in both processes (about 0.9 s of CPU in all). The two "
          "halves need the two cores: with one of them busy with other work they share the other, and the "
          "command takes about their sum (compare the one-core runs in the notes and the load average)."),
}


def write_results(rows, path: Path, extra: list[str] | None = None):
    today = datetime.date.today().isoformat()
    lines = [f"# lifedraw benchmark results ({today})", "", f"Machine: {_machine()}", "",
             f"Single thread unless stated; {N_DRAWS:.0e} draws per timing, median of {REPEATS} alternating "
             "runs. Ratio = lifedraw / reference (for the latency, time and memory rows: measured / limit, "
             "lower is better).", "",
             "| section | target | lifedraw | reference | ratio | goal | verdict | notes |",
             "|---|---|---|---|---|---|---|---|"]
    for r in rows:
        def f(v):
            return "" if v is None else (f"{v:.3g}" if isinstance(v, float) else str(v))
        goal = r.get("goal")
        goal_text = "" if goal is None else (f"<= {-goal:g} (limit)" if goal < 0 else f">= {goal:g}x")
        lines.append(f"| {r['section']} | {r.get('target', '')} | {f(r.get('ours'))} | {f(r.get('ref'))} | "
                     f"{f(r.get('ratio'))} | {goal_text} | {_verdict(r)} | {r.get('note', '')} |")
    lines += ["", "Throughput columns are draws per second; see the notes column for other units."]
    missed = sorted({r["section"] for r in rows if _verdict(r) == "MISSED"})
    if missed:
        lines += ["", "## Where a goal is missed, and what limits it", ""]
        for section in missed:
            key = section.split(".")[0]
            lines.append(f"- **{section}**: {GAPS.get(section, GAPS.get(key, 'see the notes column.'))}")
    lines += ["", "Timings on a shared 2-core virtual machine vary by 10-20 % between runs; the ratios come "
              "from alternating runs in one process, which cancels most of that drift."]
    if extra:
        lines += [""] + extra
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return "\n".join(lines)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--out", default=str(HERE / "results.md"))
    parser.add_argument("--skip", nargs="*", default=[], help="sections to skip: inversion rejection normal "
                                                               "generic refit threads dashboard life report scaling")
    args = parser.parse_args(argv)
    rows: list[dict] = []
    load_at_start = " / ".join(f"{v:.2f}" for v in os.getloadavg()) + " (1, 5, 15 min; 2 cores)"
    sections = [("inversion", bench_inversion), ("rejection", bench_rejection_and_rou), ("normal", bench_normal),
                ("generic", bench_generic), ("refit", bench_refit), ("threads", bench_threads),
                ("dashboard", bench_dashboard), ("life", bench_life), ("report", bench_report)]
    for key, fn in sections:
        if key in args.skip:
            continue
        start = time.perf_counter()
        fn(rows)
        print(f"[bench] {key}: {time.perf_counter() - start:.1f} s", file=sys.stderr)
    extra = [f"Load average when the run started: {load_at_start}.", "", LIFE_ROW_NOTE, ""]
    if "scaling" not in args.skip:
        from bench.scaling import scaling_tables
        start = time.perf_counter()
        extra += scaling_tables()
        print(f"[bench] scaling: {time.perf_counter() - start:.1f} s", file=sys.stderr)
    print(write_results(rows, Path(args.out), extra))


if __name__ == "__main__":
    main()
