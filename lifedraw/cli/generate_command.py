"""``lifedraw generate``: draw many lifetimes of a scenario to resumable shards, with a
plain-text progress bar (the engine's ``generate`` does the work).
"""
from __future__ import annotations

import sys
import time

from .numbers import seed_number, whole_number


class TextProgress:
    """A plain-text progress bar on stderr: shards done, draws per second, time left."""

    def __init__(self, stream=None, width: int = 30):
        self.stream = stream or sys.stderr
        self.width = width
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.first = None            # shards already finished when this run started
        self.start = self.last = 0.0

    def __call__(self, done: int, total: int, drawn: int) -> None:
        now = time.perf_counter()
        if self.first is None:
            self.first, self.start = done, now
        # A terminal redraws often; a log file gets a line every 10 s.
        if done < total and done != self.first and now - self.last < (0.2 if self.tty else 10.0):
            return
        self.last = now
        elapsed = now - self.start
        this_run = done - self.first
        rate = drawn / elapsed if elapsed > 0 else 0.0
        filled = int(self.width * done / max(total, 1))
        text = f"[{'#' * filled}{'.' * (self.width - filled)}] {done}/{total} shards"
        if this_run:
            text += f", {rate / 1e6:.1f} M draws/s"
        elif done == total:
            text += " (all finished by an earlier run)"
        elif done:
            text += f" ({done} finished by an earlier run)"
        if this_run and done < total:
            text += f", about {(total - done) * elapsed / this_run:.0f} s left"
        self.stream.write(("\r" + text) if self.tty else (text + "\n"))
        self.stream.flush()

    def close(self) -> None:
        if self.tty:
            self.stream.write("\n")
            self.stream.flush()


def run_generate(args) -> int:
    from ..engine.generate import DEFAULT_CHUNK, MANIFEST, dask_client, generate, read_manifest, workers_of
    from ..engine.sampling import fit
    from ..engine.scenarios import load_scenario
    from ..engine.systems import system_from_scenario

    sc = load_scenario(args.scenario)
    if sc.system and not args.model_only:
        drawable, what = system_from_scenario(sc), "system lifetimes"
    else:
        tolerance = args.tolerance if args.tolerance is not None else sc.tolerance
        drawable, what = fit(sc.target(), args.method or sc.method, tolerance), "lifetimes"
    n = args.n if args.n is not None else sc.sample_size
    seed = args.seed if args.seed is not None else sc.seed
    chunk = args.chunk if args.chunk is not None else DEFAULT_CHUNK
    bar = TextProgress()
    start = time.perf_counter()
    try:
        with dask_client(args.scheduler, args.workers, args.timeout) as client:
            where = "local threads" if client is None else f"{len(workers_of(client))} Dask workers"
            print(f"{sc.title}: {n:,} {what} ({sc.time_unit}) in chunks of {min(chunk, n):,} "
                  f"on {where}, seed {seed}", file=sys.stderr)
            generate(drawable, n, chunk=chunk, seed=seed, client=client, out=args.out, progress=bar)
    except KeyboardInterrupt:
        bar.close()
        print(f"lifedraw: stopped; finished shards are kept in {args.out}, run the same command "
              "again to resume", file=sys.stderr)
        raise
    bar.close()
    seconds = time.perf_counter() - start
    manifest = read_manifest(args.out)
    print(f"{args.out}: {manifest['chunks']} shards, {n:,} {what}, {seconds:.1f} s "
          f"(sampler {manifest['sampler']['fingerprint'][:12]}, manifest {MANIFEST})")
    return 0


def add_generate_parser(sub) -> None:
    """Register ``lifedraw generate`` on an argparse subparsers object."""
    p = sub.add_parser("generate", help="draw many lifetimes in chunks to resumable .npy shards",
                       description="Draw n lifetimes of a scenario (its [system] if it has one) in "
                                   "chunks, each from its own random stream, to .npy shards plus a "
                                   "manifest. Rerunning the same command resumes.")
    p.add_argument("scenario", help="a scenario name from scenarios/ or a path to a .toml file")
    p.add_argument("-n", type=whole_number, default=None, help="number of lifetimes, e.g. 1e9 (default: the scenario's)")
    p.add_argument("--chunk", type=whole_number, default=None,
                   help="draws per chunk and shard (default: the engine's, 1e7)")
    p.add_argument("--out", required=True, help="output folder for the shards and manifest.json")
    p.add_argument("--seed", type=seed_number, default=None, help="seed (default: the scenario's)")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--scheduler", metavar="tcp://HOST:PORT", default=None,
                       help="run on this Dask scheduler (--out must be visible to its workers)")
    where.add_argument("--workers", metavar="K", type=int, default=None,
                       help="start a local Dask cluster of K single-threaded processes on 127.0.0.1")
    p.add_argument("--timeout", type=float, default=10.0, help="seconds to wait for the scheduler (default 10)")
    p.add_argument("--method", default=None, help="sampling method for the [model] (systems: per part)")
    p.add_argument("--tolerance", type=float, default=None, help="u-error tolerance for the [model]")
    p.add_argument("--model-only", action="store_true",
                   help="draw the scenario's [model] even if it describes a [system]")
    p.set_defaults(func=run_generate)
