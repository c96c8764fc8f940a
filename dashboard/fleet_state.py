"""The fleet step's state: what the user set (fleet size, horizon, period, costs, preventive age,
warranty, sales) and the figures of the last simulation, as plain data; no UI imports.

The figures come from ``engine.fleet_study`` (renewal-equation expectations, Barlow & Proschan's
age-replacement cost rate, free-replacement warranty claims) and are computed off the event loop.
"""
from __future__ import annotations

import math
import re
from typing import Callable

import numpy as np
import param

from lifedraw.engine.cautions import FLEET_CAUTION
from lifedraw.engine.errors import ModelError
from lifedraw.engine.fleet_settings import FleetSettings, fleet_settings
from lifedraw.engine.fleet_study import SERVICE_LEVELS, default_fleet_settings, fleet_study

#: Page limits: a study on the page stays within seconds (the command line takes bigger ones).
MAX_UNITS = 200_000
MAX_RUNS = 2_000


def parse_sales(text: str) -> list[int]:
    """``"60, 90, 120"`` -> [60, 90, 120] (commas, semicolons, spaces or new lines)."""
    out = []
    for i, part in enumerate(p for p in re.split(r"[,;\s]+", str(text or "")) if p):
        try:
            value = float(part)
        except ValueError:
            raise ModelError("fleet.sales", f"value {i + 1} ({part!r}) is not a number") from None
        if not math.isfinite(value) or value < 0 or value != math.floor(value):
            raise ModelError("fleet.sales", f"value {i + 1} ({part}) must be a whole number >= 0")
        out.append(int(value))
    return out


class FleetStep(param.Parameterized):
    """One session's fleet study: settings (parameters) and the last result (plain data)."""

    units = param.Integer(default=100, bounds=(1, MAX_UNITS), doc="Units in service (sockets).")
    horizon = param.Number(default=1.0, bounds=(0, None), doc="Horizon, in the scenario's time unit.")
    period = param.Number(default=1.0, bounds=(0, None), doc="Counting period.")
    runs = param.Integer(default=200, bounds=(2, MAX_RUNS), doc="Simulated histories.")
    cost_preventive = param.Number(default=0.0, bounds=(0, None), doc="Cost of a planned replacement (0: none).")
    cost_failure = param.Number(default=0.0, bounds=(0, None), doc="Cost of a failure replacement (0: none).")
    preventive_age = param.Number(default=0.0, bounds=(0, None), doc="Replace at this age (0: at failure only).")
    warranty = param.Number(default=0.0, bounds=(0, None), doc="Warranty cover (0: no warranty study).")
    sales = param.String(default="", doc="Units sold per period, separated by commas.")

    result = param.Dict(default=None, allow_None=True, doc="Figures of the last simulation (plain data).")
    error = param.String(default="", doc="Why the last settings or run failed.")
    note = param.String(default="", doc="What the shown figures belong to.")

    def __init__(self, **params):
        super().__init__(**params)
        self.ages = np.zeros(1)
        self.scenario_name = ""

    # ---- settings --------------------------------------------------------------------------
    def adopt(self, scenario, target) -> None:
        """Take the scenario's [fleet] table (or the defaults for its model) as the settings."""
        settings = scenario.fleet if scenario.fleet is not None else default_fleet_settings(target)
        self.scenario_name = scenario.name
        self.ages = settings.unit_ages()
        self.param.update(units=min(settings.units, MAX_UNITS), horizon=settings.horizon, period=settings.period,
                          runs=min(settings.runs, MAX_RUNS), cost_preventive=settings.cost_preventive or 0.0,
                          cost_failure=settings.cost_failure or 0.0, preventive_age=settings.preventive_age or 0.0,
                          warranty=settings.warranty or 0.0, sales=", ".join(str(s) for s in settings.sales),
                          result=None, error="", note="")

    def settings(self) -> FleetSettings:
        """The settings as validated fleet settings (ModelError naming the field otherwise)."""
        table = {"units": int(self.units), "horizon": float(self.horizon), "period": float(self.period),
                 "runs": int(self.runs)}
        ages = self.ages
        if ages.size == 1 or ages.size == int(self.units):
            table["ages"] = ages.tolist() if ages.size > 1 else float(ages[0])
        if self.cost_preventive > 0 or self.cost_failure > 0:
            table.update(cost_preventive=float(self.cost_preventive), cost_failure=float(self.cost_failure))
        if self.preventive_age > 0:
            table["preventive_age"] = float(self.preventive_age)
        if self.warranty > 0 or self.sales.strip():
            table.update(warranty=float(self.warranty), sales=parse_sales(self.sales))
        if "ages" not in table:
            # The fleet size changed: the scenario's ages are picked evenly across its profile.
            pick = np.floor(np.arange(int(self.units)) * ages.size / int(self.units)).astype(np.int64)
            table["ages"] = np.sort(ages)[pick].tolist()
        return fleet_settings(table)

    # ---- results -------------------------------------------------------------------------------
    def set_result(self, outcome, what: str) -> None:
        """Adopt a payload (``fleet_payload``) or file the exception it raised."""
        if isinstance(outcome, Exception):
            self.param.update(error=str(outcome), result=None, note="")
            return
        self.param.update(result=outcome, error="", note=what)

    def fail(self, err: Exception) -> None:
        self.param.update(error=str(err))


def fleet_payload(model, sampler, settings: FleetSettings, seed: int,
                  progress: Callable[[float], None] | None = None):
    """Run the study (in a worker thread) and return its figures as plain data, or the exception."""
    try:
        study = fleet_study(model, settings, sampler=sampler, seed=seed, progress=progress)
    except Exception as err:   # shown next to the step's settings
        return err
    fleet = study["fleet"]
    mean, low, high = fleet.band(0.9)
    spares = study["spares"]
    failures_total = fleet.failures.sum(axis=1)
    out = {"edges": fleet.edges, "mean": mean, "band_low": low, "band_high": high, "exact": fleet.expected_failures,
           "exact_error": fleet.expected_error, "units": fleet.units, "runs": fleet.runs, "seed": fleet.seed,
           "method": fleet.method, "horizon": fleet.horizon, "period": fleet.period,
           "preventive_age": fleet.preventive_age,
           "preventive_mean": float((fleet.replacements.sum(axis=1) - failures_total).mean()),
           "total_mean": float(failures_total.mean()),
           "total_exact": None if fleet.expected_failures is None else float(fleet.expected_failures.sum()),
           "levels": np.array(SERVICE_LEVELS), "stock": np.array([s["stock"] for s in spares], dtype=float),
           "low": np.array([np.nan if s["low"] is None else s["low"] for s in spares], dtype=float),
           "high": np.array([np.nan if s["high"] is None else s["high"] for s in spares], dtype=float),
           "age_replacement": study["age_replacement"], "warranty": study["warranty"], "caution": FLEET_CAUTION}
    return out
