"""``lifedraw fleet``: a scenario's fleet figures (failures per period with the exact expectation,
spares, the age-replacement optimum, warranty claims) printed, optionally saved as JSON.
"""
from __future__ import annotations

import json
import os
import sys
import uuid
from pathlib import Path

from .numbers import whole_number


def add_fleet_parser(sub) -> None:
    """``lifedraw fleet SCENARIO [--runs R] [--units U] [--seed S] [--out FILE.json]``."""
    p = sub.add_parser("fleet", help="fleet figures: failures per period, spares, replacement age, warranty")
    p.add_argument("scenario", help="a scenario name or a path to a .toml file (its [fleet] table, if any)")
    p.add_argument("--runs", type=whole_number, default=None, help="simulated histories (default: the scenario's)")
    p.add_argument("--units", type=whole_number, default=None, help="fleet size (default: the scenario's)")
    p.add_argument("--seed", type=int, default=None, help="seed (default: the scenario's)")
    p.add_argument("--out", default=None, help="also write the figures to this .json file")
    p.set_defaults(func=run_fleet)


def run_fleet(args) -> int:
    from ..engine.errors import ModelError
    from ..engine.fleet_study import default_fleet_settings, fleet_study, format_study, study_table
    from ..engine.sampling import fit
    from ..engine.scenarios import load_scenario
    from ..engine.systems import system_from_scenario

    out = Path(args.out) if args.out else None
    if out is not None and out.suffix != ".json":
        raise ModelError("out", f"write the figures to a .json file, got {out.name!r}")
    sc = load_scenario(args.scenario)
    if sc.system:
        model, sampler = system_from_scenario(sc), None
    else:
        model = sc.target()
        sampler = fit(model, sc.method, tolerance=sc.tolerance)
    settings = sc.fleet if sc.fleet is not None else default_fleet_settings(model if sampler is None else sampler.target)
    seed = args.seed if args.seed is not None else sc.seed
    stated = "" if sc.fleet is not None else " (no [fleet] table: 100 new units over three mean lives)"
    print(f"{sc.title}{stated}", flush=True)

    def progress(fraction):
        print(f"\r{fraction:6.1%} done", end="", file=sys.stderr, flush=True)

    study = fleet_study(model, settings, sampler=sampler, seed=seed, runs=args.runs, units=args.units,
                        progress=progress if sys.stderr.isatty() else None)
    if sys.stderr.isatty():
        print(file=sys.stderr)
    print(format_study(study, sc.time_unit))
    if out is not None:
        temp = out.with_name(f".{out.name}.{uuid.uuid4().hex}.tmp")
        try:
            temp.write_text(json.dumps({"scenario": sc.name, "time_unit": sc.time_unit, **study_table(study)},
                                       indent=2, allow_nan=False), encoding="utf-8")
            os.replace(temp, out)
        except OSError as err:
            temp.unlink(missing_ok=True)
            raise ModelError("out", f"could not write {out}: {err}") from None
        print(f"\nwrote the figures to {out}")
    return 0
