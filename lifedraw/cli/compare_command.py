"""``lifedraw compare``: measure every applicable method on a scenario, now, on this machine."""
from __future__ import annotations

from .numbers import seed_number, whole_number


def run_compare(args) -> int:
    from ..engine.compare import compare_methods, decide, format_table
    from ..engine.scenarios import load_scenario
    sc = load_scenario(args.scenario)
    target = sc.target()
    seed = args.seed if args.seed is not None else sc.seed
    tolerance = args.tolerance if args.tolerance is not None else sc.tolerance
    print(f"{sc.title}\n{target.describe().splitlines()[0]}\n")
    rows = compare_methods(target, n=args.n, rng=seed, tolerance=tolerance, repeats=args.repeats)
    print(format_table(rows))
    print(f"\nMeasured now on this machine, single process: after one untimed warm-up batch, {args.repeats} "
          "timed batches per method; ns/draw is their median, the range their fastest and slowest.")
    print("\n" + decide(rows, args.draws, tolerance).sentence)
    return 0


def add_compare_parser(sub) -> None:
    p = sub.add_parser("compare", help="measure every applicable method on a scenario and name the one to use")
    p.add_argument("scenario")
    p.add_argument("-n", type=whole_number, default=300_000, help="draws timed per method (default 3e5)")
    p.add_argument("--seed", type=seed_number, default=None)
    p.add_argument("--tolerance", type=float, default=None)
    p.add_argument("--draws", type=whole_number, default=1_000_000,
                   help="draws you mean to take: decides which method is cheapest in all (default 1e6)")
    p.add_argument("--repeats", type=int, default=5, help="timed batches per method (default 5)")
    p.set_defaults(func=run_compare)
