"""The ``lifedraw serve`` and ``lifedraw report`` subcommands, as argparse subparsers
that ``engine.cli_more`` registers; the dashboard package is imported only when one runs.
"""
from __future__ import annotations


def _sample_count(text: str) -> int:
    from engine.cli import _number
    return _number(text)


def add_serve_parser(sub) -> None:
    """``lifedraw serve [--port 5006] [--address 127.0.0.1] [--scenario NAME] [--report-dir DIR]``."""
    p = sub.add_parser("serve", help="serve the live workbench in the browser (loopback by default)")
    p.add_argument("--port", type=int, default=5006, help="port (default 5006)")
    p.add_argument("--address", default="127.0.0.1",
                   help="address to bind (default 127.0.0.1: this machine only)")
    p.add_argument("--scenario", default=None, help="scenario to open with (name or .toml path)")
    p.add_argument("--report-dir", default=None,
                   help="where the Report cell writes (default $LIFEDRAW_REPORT_DIR or ~/lifedraw-reports)")
    p.set_defaults(func=run_serve)


def run_serve(args) -> int:
    from .app import serve
    return serve(port=args.port, address=args.address, scenario=args.scenario, report_dir=args.report_dir)


def add_report_parser(sub) -> None:
    """``lifedraw report SCENARIO -o FILE.html [-n N] [--seed S] [--method M] [--tolerance T]``."""
    p = sub.add_parser("report", help="write a self-contained HTML report of a scenario (opens offline)")
    p.add_argument("scenario", help="a scenario name from scenarios/ or a path to a .toml file")
    p.add_argument("-o", "--output", required=True, help="the report file, ending in .html")
    p.add_argument("-n", type=_sample_count, default=None, help="number of draws (default: the scenario's)")
    p.add_argument("--seed", type=int, default=None, help="seed (default: the scenario's)")
    p.add_argument("--method", default=None, help="sampling method (default: the scenario's, usually auto)")
    p.add_argument("--tolerance", type=float, default=None, help="u-error tolerance (default: the scenario's)")
    p.set_defaults(func=run_report)


def run_report(args) -> int:
    from engine.cli import CAUTION
    from engine.scenarios import load_scenario
    from .report import write_report
    sc = load_scenario(args.scenario)
    path = write_report(sc, args.output, n=args.n, seed=args.seed, method=args.method, tolerance=args.tolerance)
    print(f"wrote the report of '{sc.title}' to {path}")
    print(CAUTION)
    return 0
