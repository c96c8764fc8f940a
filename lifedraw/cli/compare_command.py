"""``lifedraw compare``: measure every applicable method on a scenario, now, on this machine."""
from __future__ import annotations

from .numbers import seed_number, whole_number


def run_compare(args) -> int:
    from ..engine.compare import compare_methods, format_table
    from ..engine.scenarios import load_scenario
    sc = load_scenario(args.scenario)
    target = sc.target()
    seed = args.seed if args.seed is not None else sc.seed
    tolerance = args.tolerance if args.tolerance is not None else sc.tolerance
    print(f"{sc.title}\n{target.describe().splitlines()[0]}\n")
    print(format_table(compare_methods(target, n=args.n, rng=seed, tolerance=tolerance)))
    print("\nMeasured now on this machine, single process; draws/s is the median of 3 timed batches.")
    return 0


def add_compare_parser(sub) -> None:
    p = sub.add_parser("compare", help="measure every applicable method on a scenario")
    p.add_argument("scenario")
    p.add_argument("-n", type=whole_number, default=300_000, help="draws timed per method (default 3e5)")
    p.add_argument("--seed", type=seed_number, default=None)
    p.add_argument("--tolerance", type=float, default=None)
    p.set_defaults(func=run_compare)
