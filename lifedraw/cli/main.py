"""The ``lifedraw`` command: list scenarios, draw samples, prove a sampler,
compare methods, write reports, serve the dashboard, generate at scale.

The command line sits above both the engine and the dashboard; engine commands run on
the engine alone, ``serve`` and ``report`` load the dashboard only when called. Every command imports
what it needs when it runs (nothing of numpy, scipy or the engine at start-up), so ``lifedraw report``
can start its picture process before this process pays for the engine.
"""
from __future__ import annotations

import argparse
import gc
import re
import sys

from .compare_command import add_compare_parser
from .dashboard_commands import add_report_parser, add_serve_parser
from .fleet_command import add_fleet_parser
from .generate_command import add_generate_parser
from .numbers import seed_number, whole_number


def csv_column_name(prefix: str, unit: str) -> str:
    """A CSV header cell from user text: letters, digits, '_' and '-' only, so a unit can neither add
    rows (new lines), split columns (commas, quotes) nor start a spreadsheet formula (=, +, -, @)."""
    safe = re.sub(r"[^0-9A-Za-z_-]+", "_", unit).strip("_-") or "unit"
    return f"{prefix}_{safe}"


def cmd_scenarios(args) -> int:
    from ..engine.errors import ModelError
    from ..engine.scenarios import load_scenario, scenario_names
    for name in scenario_names():
        try:
            title = load_scenario(name).title
        except ModelError as err:
            title = f"(invalid: {err})"
        print(f"{name:28s} {title}")
    return 0


def _sampler_for(args):
    from ..engine.sampling import fit
    from ..engine.scenarios import load_scenario
    sc = load_scenario(args.scenario)
    method = args.method or sc.method
    tol = args.tolerance if getattr(args, "tolerance", None) is not None else sc.tolerance
    return sc, fit(sc.target(), method=method, tolerance=tol)


SAMPLE_SUFFIXES = (".npy", ".csv", ".txt")


def cmd_sample(args) -> int:
    import numpy as np

    from ..engine.output_files import check_destination, write_atomically
    # The destination is checked before the model is built or a draw is made.
    out = check_destination(args.output, force=args.force, suffixes=SAMPLE_SUFFIXES)
    sc, sampler = _sampler_for(args)
    n = args.n if args.n is not None else sc.sample_size
    seed = args.seed if args.seed is not None else sc.seed
    x = sampler.sample(n, seed)
    suffix = out.suffix.lower()

    def write(fh):
        if suffix == ".npy":
            np.save(fh, x)
        elif suffix == ".csv":
            np.savetxt(fh, x, fmt="%.17g", header=csv_column_name("lifetime", sc.time_unit), comments="")
        else:
            np.savetxt(fh, x, fmt="%.17g")

    write_atomically(out, write)
    s = sampler.stats
    print(f"wrote {n} lifetimes ({sc.time_unit}) of '{sc.title}' to {out}")
    print(f"method: {s['method']} ({sampler.reason}); seed {seed}; set-up {s['setup_seconds'] * 1e3:.1f} ms")
    return 0


def cmd_check(args) -> int:
    from ..engine.cautions import CAUTION
    from ..engine.check import check
    sc, sampler = _sampler_for(args)
    n = args.n if args.n is not None else sc.sample_size
    seed = args.seed if args.seed is not None else sc.seed
    report = check(sampler, sampler.target, n=n, rng=seed)
    print(f"{sc.title}\n{sampler.target.describe()}\n")
    print(f"method: {sampler.method} — {sampler.reason}")
    print(report.summary())
    print("\n" + CAUTION)
    return 0 if report.passed() else 1


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="lifedraw", description="Exact, fast random lifetimes from reliability models.")
    sub = p.add_subparsers(dest="command", required=True)

    s = sub.add_parser("scenarios", help="list the scenarios (name, then title)")
    s.set_defaults(func=cmd_scenarios)

    def common(sp, with_output=False):
        sp.add_argument("scenario", help="a scenario name from scenarios/ or a path to a .toml file")
        sp.add_argument("-n", type=whole_number, default=None, help="number of lifetimes (default: the scenario's)")
        sp.add_argument("--method", default=None, help="auto, inversion, rejection, ratio-of-uniforms, table, ...")
        sp.add_argument("--seed", type=seed_number, default=None)
        sp.add_argument("--tolerance", type=float, default=None, help="u-error tolerance for inversion")
        if with_output:
            sp.add_argument("-o", "--output", required=True, help="output file: .npy, .csv or .txt")
            sp.add_argument("--force", action="store_true", help="replace the output file if it exists")

    s = sub.add_parser("sample", help="draw lifetimes to a file")
    common(s, with_output=True)
    s.set_defaults(func=cmd_sample)

    s = sub.add_parser("check", help="prove a sampler reproduces its scenario's model")
    common(s)
    s.set_defaults(func=cmd_check)

    for add in (add_compare_parser, add_serve_parser, add_report_parser, add_generate_parser, add_fleet_parser):
        add(sub)
    return p


def is_model_error(err: BaseException) -> bool:
    """Whether ``err`` is the engine's ModelError. Only a command that ran the engine can raise one,
    so a process that never loaded the engine is not made to load it here."""
    errors = sys.modules.get("lifedraw.engine.errors")
    return errors is not None and isinstance(err, errors.ModelError)


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except KeyboardInterrupt:
        print("lifedraw: stopped", file=sys.stderr)
        return 130
    except BrokenPipeError:  # e.g. `lifedraw scenarios | head`: the reader left, nothing to report
        sys.stderr.close()
        return 0
    except Exception as err:
        if is_model_error(err):
            print(f"lifedraw: {err}", file=sys.stderr)
            return 2
        if not isinstance(err, OSError):
            raise
        # A file system error the checks above did not foresee (disk full, permissions
        # changed mid-run): one line, never a traceback.
        print(f"lifedraw: {err.strerror or err}{f': {err.filename}' if err.filename else ''}", file=sys.stderr)
        return 2


def run() -> int:
    """The installed ``lifedraw`` program (and ``python -m lifedraw``): ``main`` on the command line.

    The process ends right after, so the garbage collector is frozen first: the interpreter's last full
    collection would otherwise walk every object the imports made (about 350,000 once the dashboard is
    loaded: 0.7 s at the end of ``lifedraw report``) only to free memory that the process hands back anyway.
    ``main`` itself leaves the collector alone, so calling it in a long-lived process changes nothing.
    """
    code = main()
    gc.freeze()
    return code


if __name__ == "__main__":
    sys.exit(run())
