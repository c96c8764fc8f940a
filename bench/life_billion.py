"""Benchmark: `life_summary` of 10^9 lazily generated draws on a local 2-worker Dask cluster,
against generating the same draws (reduced on the workers), as a ratio (goal: at most 1.5x).

Both timings start from the same lazy array of engine.generate, so each includes drawing
every chunk; the generation run reduces the draws on the workers (mean, max, histogram, as
bench/generate_billion.py does) and stores nothing. Runs alternate (generation, summary,
generation, summary, ...) and the ratio is the median of the pairs' ratios; the workers'
CPU seconds are reported beside the wall clock because other programs on the machine
slow the wall clock but not the CPU time a run needs.

    .venv/bin/python -m bench.life_billion [-n 1e9] [--chunk 1e7] [--workers 2] [--repeats 2] [--json]
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import time
from pathlib import Path

GOAL = 1.5


def _cpu_seconds() -> float:
    return time.process_time()


def _worker_cpu(client) -> float:
    return sum(client.run(_cpu_seconds).values())


def measure(scenario="gearbox-wearout", n=10**9, chunk=10**7, workers=2, seed=1, repeats=2, log=print) -> dict:
    from bench.generate_billion import drawable_of, reduce_on_workers
    from lifedraw.engine.generate import dask_client, generate
    from lifedraw.engine.life import life_summary
    from lifedraw.engine.scenarios import load_scenario

    sc = load_scenario(scenario)
    drawable = drawable_of(sc)
    missions = list(sc.mission_times or [])
    load_start = os.getloadavg()
    runs = {"generate": [], "life_summary": []}
    cpu = {"generate": [], "life_summary": []}
    with dask_client(workers=workers) as client:
        client.run(lambda: None)                       # workers up before any clock starts
        x = generate(drawable, n, chunk=chunk, seed=seed, client=client)
        # One small warm-up of both, so neither pays the workers' first imports and compilations.
        warm = generate(drawable, min(n, 2 * chunk), chunk=chunk, seed=seed, client=client)
        reduce_on_workers(warm, drawable, sc)
        life_summary(warm, missions)
        figures = reduced = None
        for _ in range(repeats):
            for key in ("generate", "life_summary"):
                cpu_before = _worker_cpu(client)
                start = time.perf_counter()
                if key == "generate":
                    reduced = reduce_on_workers(x, drawable, sc)
                else:
                    figures = life_summary(x, missions)
                runs[key].append(time.perf_counter() - start)
                cpu[key].append(_worker_cpu(client) - cpu_before)
                log(f"{key}: {runs[key][-1]:.1f} s wall, {cpu[key][-1]:.1f} s worker CPU", flush=True)
    ratios = [s / g for g, s in zip(runs["generate"], runs["life_summary"])]
    cpu_ratios = [s / g for g, s in zip(cpu["generate"], cpu["life_summary"])]
    return {"n": n, "chunk": chunk, "workers": workers, "scenario": scenario, "repeats": repeats,
            "generate_s": statistics.median(runs["generate"]), "life_summary_s": statistics.median(runs["life_summary"]),
            "ratio": statistics.median(ratios), "cpu_ratio": statistics.median(cpu_ratios),
            "ratios": ratios, "cpu_ratios": cpu_ratios,
            "computation": figures["computation"]["text"], "passes": figures["passes"],
            "b_lives": {k: v["estimate"] for k, v in figures["b_lives"].items()}, "reduced": reduced,
            "load_start": load_start, "load_end": os.getloadavg()}


def main(argv=None) -> int:
    from lifedraw.cli.numbers import whole_number

    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--scenario", default="gearbox-wearout")
    p.add_argument("-n", type=whole_number, default=10**9)
    p.add_argument("--chunk", type=whole_number, default=10**7)
    p.add_argument("--workers", type=int, default=2)
    p.add_argument("--seed", type=int, default=1)
    p.add_argument("--repeats", type=int, default=2)
    p.add_argument("--json", action="store_true", help="print one JSON line at the end (for bench.run)")
    args = p.parse_args(argv)
    log = (lambda *a, **k: print(*a, file=sys.stderr, **k)) if args.json else print
    res = measure(args.scenario, args.n, args.chunk, args.workers, args.seed, args.repeats, log)
    if args.json:
        print(json.dumps(res))
        return 0
    print(f"{res['n']:.3g} draws of {res['scenario']} in chunks of {res['chunk']:.3g} on {res['workers']} local workers")
    print(f"generation (reduced on the workers): {res['generate_s']:.1f} s; life_summary: {res['life_summary_s']:.1f} s "
          f"(medians of {res['repeats']})")
    print(f"ratio {res['ratio']:.2f} (goal <= {GOAL}); worker CPU ratio {res['cpu_ratio']:.2f}")
    print(f"life_summary: {res['computation']}")
    print(f"load average {res['load_start'][0]:.2f} at the start, {res['load_end'][0]:.2f} at the end (2 cores)")
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
    sys.exit(main())
