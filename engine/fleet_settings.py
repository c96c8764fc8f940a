"""A scenario's optional [fleet] table: the fleet, its ages, the horizon, costs, warranty and sales,
validated key by key (every bad value a ModelError naming ``fleet.<key>``).

The layout is lifedraw's own; DEVELOPERS.md ("Adding a scenario") documents it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from .errors import ModelError, finite_number

KEYS = ("units", "ages", "age_profile", "horizon", "period", "runs", "cost_preventive", "cost_failure",
        "preventive_age", "warranty", "sales")
MAX_UNITS = 10_000_000
MAX_RUNS = 100_000


@dataclass(frozen=True)
class FleetSettings:
    """What a fleet study needs besides the model (all times in the scenario's time unit)."""

    units: int
    horizon: float
    period: float
    ages: tuple[float, ...] = (0.0,)
    age_profile: tuple[tuple[float, int], ...] = ()
    runs: int = 200
    cost_preventive: float | None = None
    cost_failure: float | None = None
    preventive_age: float | None = None
    warranty: float | None = None
    sales: tuple[int, ...] = field(default_factory=tuple)

    def unit_ages(self) -> np.ndarray:
        """One age per unit: from the age profile, the list, or the single age."""
        if self.age_profile:
            return np.repeat([a for a, _ in self.age_profile], [n for _, n in self.age_profile]).astype(float)
        if len(self.ages) == 1:
            return np.full(self.units, float(self.ages[0]))
        return np.asarray(self.ages, dtype=float)

    def with_values(self, **values) -> "FleetSettings":
        """A copy with new values, each validated as in a scenario file."""
        return fleet_settings(self.to_table() | values)

    def to_table(self) -> dict[str, Any]:
        out: dict[str, Any] = {"units": self.units, "horizon": self.horizon, "period": self.period,
                               "runs": self.runs}
        if self.age_profile:
            out["age_profile"] = [{"age": a, "units": n} for a, n in self.age_profile]
        else:
            out["ages"] = self.ages[0] if len(self.ages) == 1 else list(self.ages)
        for key in ("cost_preventive", "cost_failure", "preventive_age", "warranty"):
            if getattr(self, key) is not None:
                out[key] = getattr(self, key)
        if self.sales:
            out["sales"] = list(self.sales)
        return out


def _whole(key: str, value, low: int, high: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise ModelError(f"fleet.{key}", f"must be a whole number, got {value!r}")
    if not math.isfinite(float(value)) or float(value) != math.floor(float(value)):
        raise ModelError(f"fleet.{key}", f"must be a whole number, got {value!r}")
    number = int(value)
    if not low <= number <= high:
        raise ModelError(f"fleet.{key}", f"must lie between {low:,} and {high:,}, got {number:,}")
    return number


def _optional(table, key, **kw):
    value = table.get(key)
    return None if value is None else finite_number(f"fleet.{key}", value, **kw)


def fleet_settings(table: Mapping) -> FleetSettings:
    """Validate a [fleet] table (see the module docstring)."""
    if not isinstance(table, Mapping):
        raise ModelError("fleet", "must be a table of fleet settings")
    unknown = sorted(set(table) - set(KEYS))
    if unknown:
        raise ModelError(f"fleet.{unknown[0]}", f"is not a fleet setting; known: {', '.join(KEYS)}")
    for key in ("units", "horizon", "period"):
        if key not in table:
            raise ModelError(f"fleet.{key}", "missing from the [fleet] table")
    units = _whole("units", table["units"], 1, MAX_UNITS)
    horizon = finite_number("fleet.horizon", table["horizon"], positive=True)
    period = finite_number("fleet.period", table["period"], positive=True)
    if horizon / period > 10_000:
        raise ModelError("fleet.period", f"{horizon:g} / {period:g} makes more than 10,000 periods")
    runs = _whole("runs", table.get("runs", 200), 2, MAX_RUNS)
    if "ages" in table and "age_profile" in table:
        raise ModelError("fleet.age_profile", "give either ages or an age_profile, not both")
    ages: tuple[float, ...] = (0.0,)
    profile: tuple[tuple[float, int], ...] = ()
    if "age_profile" in table:
        raw = table["age_profile"]
        if not isinstance(raw, list) or not raw:
            raise ModelError("fleet.age_profile", "must be a list of {age, units} tables")
        rows = []
        for i, row in enumerate(raw):
            where = f"fleet.age_profile[{i}]"
            if not isinstance(row, Mapping) or set(row) != {"age", "units"}:
                raise ModelError(where, "must be a table {age = ..., units = ...}")
            rows.append((finite_number(f"{where}.age", row["age"], nonnegative=True),
                         _whole(f"age_profile[{i}].units", row["units"], 1, MAX_UNITS)))
        if sum(n for _, n in rows) != units:
            raise ModelError("fleet.age_profile", f"counts {sum(n for _, n in rows):,} units; the fleet has {units:,}")
        profile = tuple(rows)
    elif "ages" in table:
        raw = table["ages"]
        values = raw if isinstance(raw, list) else [raw]
        ages = tuple(finite_number(f"fleet.ages[{i}]", v, nonnegative=True) for i, v in enumerate(values))
        if len(ages) not in (1, units):
            raise ModelError("fleet.ages", f"{len(ages)} ages for {units} units; give one age, or one per unit")
    cost_p = _optional(table, "cost_preventive", positive=True)
    cost_f = _optional(table, "cost_failure", positive=True)
    if (cost_p is None) != (cost_f is None):
        missing = "cost_failure" if cost_f is None else "cost_preventive"
        raise ModelError(f"fleet.{missing}", "costs come in pairs: give cost_preventive and cost_failure")
    warranty = _optional(table, "warranty", positive=True)
    sales: tuple[int, ...] = ()
    if "sales" in table:
        raw = table["sales"]
        if not isinstance(raw, list) or not raw or len(raw) > 1000:
            raise ModelError("fleet.sales", "must be a list of 1 to 1000 units sold per period")
        sales = tuple(_whole(f"sales[{i}]", v, 0, MAX_UNITS) for i, v in enumerate(raw))
        if sum(sales) == 0:
            raise ModelError("fleet.sales", "no unit is sold in any period")
    if (warranty is None) != (not sales):
        raise ModelError("fleet.warranty" if warranty is None else "fleet.sales",
                         "a warranty study needs both warranty (the cover) and sales (units sold per period)")
    return FleetSettings(units=units, horizon=horizon, period=period, ages=ages, age_profile=profile, runs=runs,
                         cost_preventive=cost_p, cost_failure=cost_f,
                         preventive_age=_optional(table, "preventive_age", positive=True),
                         warranty=warranty, sales=sales)

