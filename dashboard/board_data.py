"""Derived data of the drawing board's state for the views and the report: histogram, hazard,
Weibull plot, QQ/PP, counters, geometry, life figures, the method comparison and its verdict."""
from __future__ import annotations

import dataclasses
import logging
import time

from lifedraw.engine.scenarios import Scenario

from .check_data import histogram_payload, model_on_bins, pp_payload, qq_payload
from .life_curves import hazard_payload, model_hazard, model_weibull, weibull_payload

log = logging.getLogger("lifedraw.dashboard")


class BoardData:
    """What the views and the report read (a part of DrawingBoard, which holds the state)."""

    # ---- derived data for the views (plain arrays and dicts) ------------------------------------
    def _model_on_bins(self):
        """Expected share of each bin and the density curve, cached per refit."""
        edges = self.acc.edges
        if self._model_curve is None or self._model_curve[0] is not edges:
            self._model_curve = (edges, *model_on_bins(self.target, edges))
        return self._model_curve[1:]

    def histogram_data(self) -> dict:
        return histogram_payload(self.acc, self._model_on_bins(), self.view_right, bool(self.log_scale),
                                 self.scenario.time_unit)

    def qq_data(self) -> dict:
        return qq_payload(self.acc, self.table, self.scenario.time_unit)

    def pp_data(self) -> dict:
        return pp_payload(self.acc, self.table)

    def ks(self) -> tuple[float, float]:
        return self.acc.ks()

    def hazard_data(self) -> dict:
        """h(t) and H(t) of the model beside their estimates from all draws (dashboard.life_curves)."""
        acc, log = self.acc, bool(self.hazard_log)
        key = ("hazard", self.version, id(acc.edges), log)
        if self._curves.get("hazard", (None,))[0] != key:
            self._curves["hazard"] = (key, model_hazard(self.target, acc.edges, self.view_right, log))
        return hazard_payload(self.target, acc.edges, acc.counts, acc.below, acc.n, self.view_right, log,
                              self.scenario.time_unit, model=self._curves["hazard"][1])

    def weibull_data(self) -> dict:
        """The probability plot on Weibull scales: model, draws (reservoir quantiles), field data."""
        key = ("weibull", self.version, id(self.target))
        if self._curves.get("weibull", (None,))[0] != key:
            self._curves["weibull"] = (key, model_weibull(self.target))
        return weibull_payload(self.target, self.acc.sample_quantiles, int(self.acc.x.size), self.n,
                               self.scenario.time_unit, model=self._curves["weibull"][1])

    def decision(self):
        """The method comparison's verdict for the planned number of draws (engine.compare.decide)."""
        from lifedraw.engine.compare import decide
        if not self.comparison:
            return None
        return decide(self.comparison, int(self.planned_draws), float(self.tolerance))

    def counters(self) -> dict:
        return dict(self.sampler.stats)

    def geometry(self) -> dict:
        """The sampler's own picture data (cached per refit)."""
        if self._geometry is None:
            self._geometry = self._guard("method", self.sampler.geometry, 400, 0) or {"method": self.sampler.method}
        return self._geometry

    def life_figures(self) -> dict | None:
        """Life figures of the draws so far (reservoir) beside the model's exact values."""
        from lifedraw import engine
        if self._exact_life is None:
            self._exact_life = self._guard("run", engine.exact_life_figures, self.target,
                                           self.scenario.mission_times)
        if self.acc is None or self.acc.x.size < 2:
            return {"sample": None, "exact": self._exact_life, "n": 0, "total": self.n}
        sample = self._guard("run", engine.life_summary, self.acc.x, self.scenario.mission_times)
        return {"sample": sample, "exact": self._exact_life, "n": int(self.acc.x.size), "total": self.n}

    def system_figures(self, n: int = 100_000) -> dict | None:
        """For a scenario with a [system] table: system life figures from n structure draws
        beside the exact ones (cached until the model changes); None otherwise."""
        if not self.scenario.system:
            return None
        if self._system_life is None:
            self._system_life = self._guard("run", self._compute_system_figures, n) or {}
        return self._system_life or None

    def _compute_system_figures(self, n: int) -> dict:
        from lifedraw import engine
        from lifedraw.engine.systems import as_target, system_from_scenario
        system = system_from_scenario(self.scenario)
        missions = self.scenario.mission_times
        return {"name": system.name or "system", "describe": system.describe(), "n": n, "total": n,
                "sample": system.life_summary(n, int(self.seed), missions),
                "exact": engine.exact_life_figures(as_target(system), missions)}

    def run_comparison(self, n: int = 100_000) -> list:
        """Measure every method on the current model now (engine.compare.compare_methods)."""
        from lifedraw.engine.compare import compare_methods
        try:
            result = compare_methods(self.target, n=n, rng=self.seed, tolerance=float(self.tolerance))
        except Exception as err:
            result = err
        return self.set_comparison(result, n)

    def set_comparison(self, result, n: int) -> list:
        """Adopt measured rows, or file the exception ``result`` under "comparison"."""
        if isinstance(result, Exception):
            self.file_error("comparison", result)
            return []
        self._set_error("comparison", None)
        repeats = max((int(getattr(r, "repeats", 0) or 0) for r in result), default=0)
        self.comparison_note = (f"{n:,} draws per method, measured at {time.strftime('%H:%M:%S')} on this "
                                f"machine in one process: one untimed warm-up batch, then {repeats} timed "
                                "batches; the cost per draw is their median, the range their fastest and slowest")
        self.comparison = list(result)
        return self.comparison

    def current_scenario(self) -> Scenario:
        """The scenario as it stands now: current values, method, seed, tolerance and sample size."""
        return dataclasses.replace(self.scenario, method=self.method, seed=int(self.seed),
                                   tolerance=float(self.tolerance))

    def scenario_toml(self) -> str:
        return self.current_scenario().to_toml()

