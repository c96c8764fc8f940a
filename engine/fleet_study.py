"""Everything a scenario's fleet settings ask for, in one call shared by the command line, the page
and the report: the fleet simulation with its exact expectation, spares, the age-replacement
optimum (Barlow & Proschan 1965) and free-replacement warranty claims (renewal function).
"""
from __future__ import annotations

import math
from typing import Callable

import numpy as np

from .age_replacement import age_replacement
from .cautions import FLEET_CAUTION
from .errors import ModelError
from .fleet import simulate_fleet
from .fleet_settings import FleetSettings, fleet_settings
from .generate import whole_number
from .warranty import warranty_claims

SERVICE_LEVELS = (0.80, 0.90, 0.95, 0.99)


def default_fleet_settings(target) -> FleetSettings:
    """Settings for a scenario without a [fleet] table: 100 new units over three mean lives (rounded
    to two significant digits) in 12 periods."""
    mean = float(target.mean())
    if not (math.isfinite(mean) and mean > 0):
        mean = float(target.quantile(0.5))
    horizon = float(f"{3 * mean:.2g}")
    return fleet_settings({"units": 100, "horizon": horizon, "period": horizon / 12, "runs": 200})


def resized_ages(settings: FleetSettings, units: int) -> np.ndarray:
    """The settings' ages for another fleet size: picked evenly across the (sorted) age list, so an
    age profile keeps its proportions."""
    ages = np.sort(settings.unit_ages())
    if ages.size == units:
        return ages
    return ages[np.floor(np.arange(units) * ages.size / units).astype(np.int64)]


def fleet_study(model, settings: FleetSettings, *, sampler=None, seed: int = 0, runs: int | None = None,
                units: int | None = None, client=None, progress: Callable[[float], None] | None = None) -> dict:
    """Run what ``settings`` asks for on ``model`` (a Target or a system); ``sampler`` (optional)
    draws the lifetimes. ``progress(fraction)`` is called as the work advances."""
    if not isinstance(settings, FleetSettings):
        raise ModelError("fleet", "must be fleet settings (engine.fleet_settings)")
    units = whole_number("units", settings.units if units is None else units, 1)
    runs = whole_number("runs", settings.runs if runs is None else runs, 2)
    ages = resized_ages(settings, units)
    drawer = sampler if sampler is not None else model
    share = 1.0 if settings.warranty is None else 0.6

    def fleet_progress(done, total):
        if progress is not None:
            progress(share * done / max(total, 1))

    fleet = simulate_fleet(drawer, units, settings.horizon, period=settings.period, ages=ages,
                           preventive_age=settings.preventive_age, runs=runs, seed=seed, client=client,
                           progress=fleet_progress)
    replacement = None
    if settings.cost_preventive is not None:
        replacement = age_replacement(model, settings.cost_preventive, settings.cost_failure)
    warranty = None
    if settings.warranty is not None:
        def warranty_progress(done, total):
            if progress is not None:
                progress(share + (1 - share) * done / max(total, 1))
        warranty = warranty_claims(drawer, settings.sales, settings.warranty, settings.period, runs=runs,
                                   seed=seed, client=client, progress=warranty_progress)
    if progress is not None:
        progress(1.0)
    return {"settings": settings, "fleet": fleet, "spares": [fleet.spares(level) for level in SERVICE_LEVELS],
            "age_replacement": replacement, "warranty": warranty, "caution": FLEET_CAUTION}


def format_study(study: dict, time_unit: str = "hours") -> str:
    """Plain text of a study: what the command line prints."""
    fleet = study["fleet"]
    lines = [fleet.summary(time_unit).replace(FLEET_CAUTION, "").rstrip()]
    replacement = study["age_replacement"]
    if replacement is not None:
        lines.append("")
        lines.append(f"Age replacement (Barlow & Proschan 1965), preventive cost {replacement['cost_preventive']:g}, "
                     f"failure cost {replacement['cost_failure']:g}:")
        lines.append(f"  run to failure: {replacement['cost_rate_run_to_failure']:.6g} per {time_unit[:-1] or time_unit} "
                     f"and unit (cost_failure / MTTF, MTTF {replacement['mttf']:.6g})")
        if replacement["optimal_age"] is None:
            lines.append("  no finite replacement age beats running to failure for this model and these costs")
        else:
            lines.append(f"  optimal replacement age {replacement['optimal_age']:.6g}: {replacement['cost_rate']:.6g} "
                         f"per {time_unit[:-1] or time_unit} and unit ({replacement['saving']:.1%} below run to failure)")
    warranty = study["warranty"]
    if warranty is not None:
        lines.append("")
        lines.append(f"Free-replacement warranty claims: cover {warranty['warranty']:g} {time_unit}, "
                     f"sales {', '.join(str(int(s)) for s in warranty['sales'])} per period (sold at the start "
                     f"of each period); {warranty['runs']} runs")
        lines.append(f"{'period':>6} {'from':>8} {'to':>8} {'exact':>10} {'simulated':>10} {'95% interval of mean':>24}")
        edges = warranty["edges"]
        for k in range(warranty["expected"].size):
            lines.append(f"{k + 1:>6} {edges[k]:>8g} {edges[k + 1]:>8g} {warranty['expected'][k]:>10.3f} "
                         f"{warranty['mean'][k]:>10.3f} {warranty['mean_low'][k]:>11.3f} - {warranty['mean_high'][k]:<10.3f}")
        lines.append(f"claims in all: exact {warranty['total_expected']:.3f}, simulated mean {warranty['total_mean']:.3f}")
    lines.append("")
    lines.append(study["caution"])
    return "\n".join(lines)


def study_table(study: dict) -> dict:
    """Plain data of a study (lists and numbers) for a JSON file."""
    from .storage import jsonable
    fleet = study["fleet"]
    mean, low, high = fleet.band(0.9)

    def listed(value):
        return None if value is None else np.asarray(value, dtype=float).tolist()

    out = {"settings": study["settings"].to_table(), "units": fleet.units, "runs": fleet.runs, "seed": fleet.seed,
           "method": fleet.method, "period_edges": listed(fleet.edges),
           "failures": {"mean": listed(mean), "band_5": listed(low), "band_95": listed(high),
                        "exact": listed(fleet.expected_failures), "exact_error": fleet.expected_error},
           "replacements_mean": listed(fleet.replacements.mean(axis=0)),
           "spares": study["spares"], "caution": study["caution"]}
    replacement = study["age_replacement"]
    if replacement is not None:
        out["age_replacement"] = {k: (listed(v) if isinstance(v, np.ndarray) else v) for k, v in replacement.items()}
    warranty = study["warranty"]
    if warranty is not None:
        out["warranty"] = {k: listed(warranty[k]) for k in ("edges", "expected", "mean", "mean_low", "mean_high",
                                                            "band_low", "band_high", "sales")}
        out["warranty"].update({k: warranty[k] for k in ("warranty", "period", "runs", "total_expected",
                                                         "total_mean", "policy", "sold_at")})
    return jsonable(out)
