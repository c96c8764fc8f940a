"""Further ``lifedraw`` subcommands, registered on the main parser by ``engine.cli``."""
from __future__ import annotations

import argparse

EXTRA_COMMANDS: list = []


def command(register):
    """Decorator: a function that adds one subcommand to the parser."""
    EXTRA_COMMANDS.append(register)
    return register


def whole_number(text: str) -> int:
    """Accept 100000, 1e5 or 1_000_000 for sizes."""
    try:
        value = float(str(text).replace("_", ""))
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if value != int(value):
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}")
    return int(value)


_number = whole_number


@command
def _compare(sub):
    def run(args):
        from .compare import compare_methods, format_table
        from .scenarios import load_scenario
        sc = load_scenario(args.scenario)
        target = sc.target()
        print(f"{sc.title}\n{target.describe().splitlines()[0]}\n")
        print(format_table(compare_methods(target, n=args.n, rng=args.seed or sc.seed,
                                           tolerance=args.tolerance or sc.tolerance)))
        print("\nMeasured now on this machine, single process; draws/s is the median of 3 timed batches.")
        return 0

    p = sub.add_parser("compare", help="measure every applicable method on a scenario")
    p.add_argument("scenario")
    p.add_argument("-n", type=_number, default=300_000, help="draws timed per method (default 3e5)")
    p.add_argument("--seed", type=int, default=None)
    p.add_argument("--tolerance", type=float, default=None)
    p.set_defaults(func=run)


# The browser workbench and the HTML report live in the dashboard package; its
# commands module is light (argparse only) and imports Panel only when run.
@command
def _serve(sub):
    from dashboard.commands import add_serve_parser
    add_serve_parser(sub)


@command
def _report(sub):
    from dashboard.commands import add_report_parser
    add_report_parser(sub)


@command
def _generate(sub):
    from .generate import add_generate_parser
    add_generate_parser(sub)
