"""The ``lifedraw serve`` and ``lifedraw report`` subcommands; the dashboard (Panel, Bokeh,
HoloViews) is imported only when one of them runs, so the other commands start fast. ``report`` draws
its pictures in a second process, started before anything else, so the plotting libraries load there
while this process loads the engine and computes (``dashboard.picture_process``).
"""
from __future__ import annotations

import gc

from ..dashboard.defaults import DEFAULT_ADDRESS, DEFAULT_PORT
from .numbers import seed_number, whole_number


def add_serve_parser(sub) -> None:
    """``lifedraw serve [--port PORT] [--address ADDRESS] [--scenario NAME] [--report-dir DIR]``."""
    p = sub.add_parser("serve", help="serve the live drawing board in the browser (loopback by default)")
    p.add_argument("--port", type=int, default=DEFAULT_PORT, help=f"port (default {DEFAULT_PORT})")
    p.add_argument("--address", default=DEFAULT_ADDRESS,
                   help=f"address to bind (default {DEFAULT_ADDRESS}: this machine only)")
    p.add_argument("--scenario", default=None, help="scenario to open with (name or .toml path)")
    p.add_argument("--report-dir", default=None,
                   help="where the Report step writes (default $LIFEDRAW_REPORT_DIR or ~/lifedraw-reports)")
    p.set_defaults(func=run_serve)


def run_serve(args) -> int:
    from ..dashboard.app import serve
    return serve(port=args.port, address=args.address, scenario=args.scenario, report_dir=args.report_dir)


def add_report_parser(sub) -> None:
    """``lifedraw report SCENARIO -o FILE.html [-n N] [--seed S] [--method M] [--tolerance T]``."""
    p = sub.add_parser("report", help="write a self-contained HTML report of a scenario (opens offline)")
    p.add_argument("scenario", help="a scenario name from scenarios/ or a path to a .toml file")
    p.add_argument("-o", "--output", required=True, help="the report file, ending in .html")
    p.add_argument("--force", action="store_true", help="replace the report file if it exists")
    p.add_argument("-n", type=whole_number, default=None, help="number of draws (default: the scenario's)")
    p.add_argument("--seed", type=seed_number, default=None, help="seed (default: the scenario's)")
    p.add_argument("--method", default=None, help="sampling method (default: the scenario's, usually auto)")
    p.add_argument("--tolerance", type=float, default=None, help="u-error tolerance (default: the scenario's)")
    p.set_defaults(func=run_report)


def run_report(args) -> int:
    # The command's objects (the imports' some 200,000, the report's data) live until the report is
    # written: the cyclic collector would walk them again and again to free about 1 MB, so it pauses (here
    # and in the picture process: 0.9 s of CPU less for the two, in alternating runs with and without). At the end they are kept out of later collections (gc.freeze) rather than walked once
    # more as the collector resumes: the command line ends next, and a long-lived caller keeps the
    # imported modules' objects anyway.
    collecting = gc.isenabled()
    gc.disable()
    try:
        return write_report_now(args)
    finally:
        gc.freeze()
        if collecting:
            gc.enable()


def write_report_now(args) -> int:
    from ..dashboard.picture_process import report_pictures
    with report_pictures() as pictures:
        from ..dashboard.report import build_report
        from ..engine.cautions import CAUTION
        from ..engine.scenarios import load_scenario
        from ..engine.output_files import check_destination, write_atomically
        # The destination is checked before the (costly) report is built; written atomically.
        path = check_destination(args.output, force=args.force, suffixes=(".html", ".htm"))
        sc = load_scenario(args.scenario)
        text = build_report(sc, n=args.n, seed=args.seed, method=args.method, tolerance=args.tolerance,
                            pictures=pictures)
    write_atomically(path, text)
    print(f"wrote the report of '{sc.title}' to {path}")
    print(CAUTION)
    return 0
