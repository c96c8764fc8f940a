"""Per-session state of the drawing board: what the user chose, and what the engine derived from it.
Draws are kept in bounded memory: a fixed-bin histogram and a reservoir sample (Vitter 1985, algorithm R).

No user-interface imports here: the classes are plain ``param.Parameterized``
objects, tested without a browser. Every engine call that can fail on user input
goes through ``DrawingBoard._guard``, which keeps the last valid model running and
files a short message under the field that caused it.
"""
from __future__ import annotations

import contextlib
import dataclasses
import logging
import math
import re
import time
import warnings

import numpy as np
import param
from scipy import stats as _stats

from lifedraw.engine import ModelError, fit
from lifedraw.engine.errors import MethodNotApplicable
from lifedraw.engine.methods import method_names
from lifedraw.engine.scenarios import DEFAULT_SCENARIO, Scenario, load_scenario, scenario_from_dict, scenario_names

from .life_curves import hazard_payload, model_hazard, model_weibull, weibull_payload

log = logging.getLogger("lifedraw.dashboard")

RESERVOIR_SIZE = 200_000
HIST_BINS = 160
CDF_NODES = 1025
TAIL_NODES = 64
PLOT_POINTS = 200
TRACE_LIMIT = 5_000
# The histogram spans the model's (LOW_Q, FAR_Q) quantiles; the linear view crops at VIEW_Q.
LOW_Q, VIEW_Q, FAR_Q = 5e-4, 0.9995, 1 - 1e-5
TOLERANCES = (1e-6, 1e-8, 1e-10, 1e-12)
#: Start streams until Pause (or this many draws): far above any first batch.
STREAM_LIMIT = 50_000_000
#: The number of draws a user means to take, which decides the method comparison's winner.
PLANNED_DRAWS = (10_000, 100_000, 1_000_000, 10_000_000, 100_000_000, 1_000_000_000)
FORMULA_KINDS = ("density", "hazard", "cdf")

# Errors are filed by group ("scenario", "model", "upload", "parameters", "method", "run",
# "comparison", "report"); the page shows each group next to its controls.


# ---- the model's cdf, fast enough to test every batch ---------------------------------------

class CdfTable:
    """F at ~1000 nodes placed at quantiles of a probe sample, interpolated linearly in the bulk.

    The values at the nodes are the model's exact cdf (the probe only decides
    where the nodes go, so a faulty sampler cannot bias them). Between nodes the
    error is about the change of F's slope across one node gap times the gap,
    below 1e-5 here: far below the KS resolution 1/sqrt(n) of any live sample. Beyond
    the probe's TAIL_NODES-th smallest and largest values, where nodes would be
    sparse and F may bend sharply (a density pole, a hazard growing exponentially),
    the exact cdf is used: a fraction 2 * TAIL_NODES / probe size of the draws.
    Targets with atoms (product-limit) use their exact cdf, which is cheap, and
    the left limit F(x-) needed at an atom.
    """

    def __init__(self, target, probe: np.ndarray):
        self.target = target
        self.atoms = np.asarray(target.atoms, dtype=float)
        probe = np.sort(probe[np.isfinite(probe)])
        if probe.size > 4 * TAIL_NODES:
            inner = probe[TAIL_NODES:-TAIL_NODES]
            # Geometric steps in probability towards both ends keep |error| ~ step^2 / F
            # small where F (or 1 - F) is small and curved, as near a density pole.
            ends = np.geomspace(1e-4, 0.05, 250)
            p = np.unique(np.concatenate([np.linspace(0.0, 1.0, CDF_NODES), ends, 1.0 - ends]))
            self.nodes = np.unique(np.quantile(inner, p))
        else:
            self.nodes = np.empty(0)
        self.values = np.maximum.accumulate(np.asarray(target.cdf(self.nodes), dtype=float))

    @property
    def exact(self) -> bool:
        return self.atoms.size > 0 or self.nodes.size < 2

    def cdf(self, x: np.ndarray) -> np.ndarray:
        if self.exact:
            return np.asarray(self.target.cdf(x), dtype=float)
        out = np.interp(x, self.nodes, self.values)
        outside = (x < self.nodes[0]) | (x > self.nodes[-1])
        if outside.any():
            out[outside] = self.target.cdf(x[outside])
        return out

    def cdf_left(self, x: np.ndarray) -> np.ndarray:
        """F(x-): differs from F(x) only at an atom."""
        if not self.atoms.size:
            return self.cdf(x)
        out = self.cdf(x)
        on = np.isin(x, self.atoms)
        if on.any():
            out[on] = self.target.cdf(np.nextafter(x[on], -np.inf))
        return out

    def quantile(self, p) -> np.ndarray:
        """Model quantiles by inverse interpolation of the table (for plotting only)."""
        p = np.asarray(p, dtype=float)
        if self.exact:
            return np.asarray(self.target.quantile(p), dtype=float)
        values, first = np.unique(self.values, return_index=True)
        return np.interp(p, values, self.nodes[first])


def histogram_edges(target, table: CdfTable) -> tuple[np.ndarray, float]:
    """Equal-width bins from the model's LOW_Q quantile (or the start of its support) to FAR_Q;
    returns the edges and the right end of the linear view (the VIEW_Q quantile)."""
    lo, hi = target.support
    # Exact quantiles: the far tail lies beyond the probe that placed the table's nodes.
    q_low, q_view, q_far = (float(v) for v in target.quantile(np.array([LOW_Q, VIEW_Q, FAR_Q])))
    left = lo if math.isfinite(lo) else q_low
    right = min(hi, q_far) if math.isfinite(hi) else q_far
    if not right > left:
        right = left + max(abs(left), 1.0)
    return np.linspace(left, right, HIST_BINS + 1), min(max(q_view, left), right)


# ---- bounded memory of the draws -----------------------------------------------------------

class DrawAccumulator:
    """All draws as a fixed-bin histogram plus a uniform reservoir sample of at most ``capacity``.

    The reservoir follows Vitter (1985), ACM TOMS 11(1) "Random sampling with a
    reservoir", algorithm R, vectorised per batch: the i-th draw (0-based,
    i >= capacity) replaces slot j ~ U{0..i} when j < capacity. Each reservoir
    slot keeps the draw and its model cdf, so the running KS test costs one sort.
    Bins are right-closed, (e_k, e_k+1], so a bin's expected share is exactly
    F(e_k+1) - F(e_k) even when the model has atoms.
    """

    def __init__(self, edges: np.ndarray, table: CdfTable, capacity: int = RESERVOIR_SIZE, rng=None):
        self.edges = np.asarray(edges, dtype=float)
        self.table = table
        self.capacity = int(capacity)
        self.rng = np.random.default_rng(rng)
        self.counts = np.zeros(self.edges.size - 1, dtype=np.int64)
        self.below = 0
        self.above = 0
        self.n = 0
        self.x = np.empty(0)
        self.F = np.empty(0)
        self.F_left = np.empty(0)
        self._sorted_cache = None

    def add(self, x: np.ndarray) -> None:
        x = np.asarray(x, dtype=float).ravel()
        if not x.size:
            return
        idx = np.searchsorted(self.edges, x, side="left")
        idx[x == self.edges[0]] = 1
        binned = np.bincount(idx, minlength=self.edges.size + 1)
        self.below += int(binned[0])
        self.counts += binned[1:-1]
        self.above += int(binned[-1])
        F = self.table.cdf(x)
        F_left = self.table.cdf_left(x) if self.table.atoms.size else F
        room = self.capacity - self.x.size
        if room > 0:
            take = min(room, x.size)
            self.x = np.concatenate([self.x, x[:take]])
            self.F = np.concatenate([self.F, F[:take]])
            self.F_left = np.concatenate([self.F_left, F_left[:take]])
        else:
            take = 0
        rest = x.size - take
        if rest:
            seen = self.n + take + np.arange(rest)          # global index of each remaining draw
            j = np.floor(self.rng.random(rest) * (seen + 1)).astype(np.int64)
            keep = np.flatnonzero(j < self.capacity)
            # Within a batch a later draw may land on the same slot as an earlier
            # one; numpy applies repeated indices in order, so the later one wins,
            # as in the sequential algorithm.
            slots = j[keep]
            src = take + keep
            self.x[slots] = x[src]
            self.F[slots] = F[src]
            self.F_left[slots] = F_left[src]
        self.n += x.size

    def _sorted(self):
        """The reservoir sorted by value, with its cdf values in the same order (cached until the next add)."""
        if self._sorted_cache is None or self._sorted_cache[0] != self.n:
            order = np.argsort(self.x, kind="stable")
            self._sorted_cache = (self.n, self.x[order], self.F[order], self.F_left[order])
        return self._sorted_cache[1:]

    def ks(self) -> tuple[float, float]:
        """Kolmogorov-Smirnov D and p-value of the reservoir against the model.

        D = max over the sorted sample of i/m - F(x_i) and F(x_i-) - (i-1)/m; the
        p-value is scipy's exact law of D_m (``kstwo``; Simard & L'Ecuyer 2011),
        conservative when the model has atoms (Noether 1963).
        """
        m = self.x.size
        if m < 2:
            return math.nan, math.nan
        _, F, F_left = self._sorted()
        i = np.arange(1, m + 1)
        d = max(float(np.max(i / m - F)), float(np.max(F_left - (i - 1) / m)), 0.0)
        return d, float(_stats.kstwo.sf(d, m))

    def sample_quantiles(self, p) -> np.ndarray:
        """Sample p-quantiles of the reservoir (numpy's default, Hyndman & Fan 1996 definition 7)."""
        p = np.asarray(p, dtype=float)
        m = self.x.size
        if not m:
            return np.full(p.shape, np.nan)
        xs = self._sorted()[0]
        h = (m - 1) * p
        j = np.floor(h).astype(np.int64)
        k = np.minimum(j + 1, m - 1)
        return xs[j] + (h - j) * (xs[k] - xs[j])


# ---- plain data for the plots (shared with the report) --------------------------------------

def model_on_bins(target, edges: np.ndarray):
    """Expected share of each bin from cdf differences, and the density on a grid (None with atoms)."""
    F = np.asarray(target.cdf(edges), dtype=float)
    F[0] = float(target.cdf(np.nextafter(edges[0], -np.inf)))   # the first bin is closed on the left
    if target.atoms.size:
        return np.diff(F), None, None
    x = np.linspace(edges[0], edges[-1], 801)
    return np.diff(F), x, np.asarray(target.pdf(x), dtype=float)


def histogram_payload(acc: DrawAccumulator, model_bins, view_right: float, log: bool, unit: str) -> dict:
    expected, x, y = model_bins
    return {"edges": acc.edges, "counts": acc.counts.copy(), "n": acc.n, "below": acc.below,
            "above": acc.above, "expected": expected, "model_x": x, "model_pdf": y,
            "view_right": view_right, "log": bool(log), "unit": unit}


def qq_payload(acc: DrawAccumulator, table: CdfTable, unit: str) -> dict:
    p = (np.arange(PLOT_POINTS) + 0.5) / PLOT_POINTS
    return {"p": p, "model": table.quantile(p), "sample": acc.sample_quantiles(p), "unit": unit,
            "n": int(acc.x.size)}


def pp_payload(acc: DrawAccumulator, table: CdfTable) -> dict:
    p = (np.arange(PLOT_POINTS) + 0.5) / PLOT_POINTS
    xq = acc.sample_quantiles(p)
    model_p = table.cdf(xq) if acc.x.size else np.full_like(p, np.nan)
    return {"empirical": p, "model": model_p, "n": int(acc.x.size)}


# ---- the drawing board -----------------------------------------------------------------------

class DrawingBoard(param.Parameterized):
    """One user's drawing board: the chosen scenario, model, generator settings and the live stream.

    User choices are parameters; derived data (``scenario``, ``target``,
    ``sampler``, the accumulated draws) is replaced only when a rebuild
    succeeds. ``version`` counts successful refits and ``batch`` the batches
    drawn, so views can watch them.
    """

    scenario_name = param.Selector(default=DEFAULT_SCENARIO, objects=[DEFAULT_SCENARIO],
                                   doc="The scenario file picked from scenarios/.")
    method = param.Selector(default="auto", objects=["auto"], doc="Sampling method, or auto.")
    tolerance = param.Selector(default=1e-10, objects=list(TOLERANCES), doc="u-error tolerance.")
    seed = param.Integer(default=20261201, bounds=(0, 2**63 - 1), doc="Seed of the stream.")
    batch_size = param.Integer(default=50_000, bounds=(1_000, 500_000), doc="Draws per batch.")
    stop_at = param.Integer(default=STREAM_LIMIT, bounds=(1_000, STREAM_LIMIT), doc="The stream stops here.")
    log_scale = param.Boolean(default=False, doc="Log density axis and the far tail in view.")
    hazard_log = param.Boolean(default=False, doc="Hazard rate and cumulative hazard on log-log axes.")
    planned_draws = param.Selector(default=1_000_000, objects=list(PLANNED_DRAWS),
                                   doc="Draws the user means to take: decides the comparison's winner.")
    running = param.Boolean(default=False, doc="Is the stream drawing batches?")

    values = param.Dict(default={}, doc="Current value of each scenario parameter.")
    errors = param.Dict(default={}, doc="Field group -> message of the last failed input.")
    version = param.Integer(default=0, doc="Bumps on every successful refit.")
    batch = param.Integer(default=0, doc="Bumps on every batch drawn (and on a reset).")
    comparison = param.List(default=[], doc="Rows of the last method comparison.")
    comparison_note = param.String(default="")

    def __init__(self, scenario: str | Scenario | None = None, **params):
        super().__init__(**params)
        self._busy = False
        names = scenario_names()
        self.param.scenario_name.objects = names
        self.param.method.objects = method_names()
        self.scenario: Scenario | None = None
        self.target = None
        self.sampler = None
        self.table: CdfTable | None = None
        self.acc: DrawAccumulator | None = None
        self.view_right = 0.0
        self._rng = None
        self._exact_life = None
        self._system_life = None
        self._geometry = None
        self._model_curve = None
        self.trace = {"n": [], "ks_p": [], "acceptance": []}
        self.last_refit_ms = 0.0
        self._availability = None
        self._curves: dict = {}         # model-only curves of the pictures, cached per refit
        self.custom: dict[str, Scenario] = {}      # edited models and uploads of this session, by name
        if isinstance(scenario, Scenario):
            sc = scenario
        else:
            sc = load_scenario(scenario or (DEFAULT_SCENARIO if DEFAULT_SCENARIO in names else names[0]))
        if sc.name not in names:
            self.param.scenario_name.objects = [*names, sc.name]
        self._adopt_scenario_settings(sc)
        with self._quiet():
            self.scenario_name = sc.name
        if not self._rebuild(sc, "scenario"):
            raise ModelError(*self._first_error())

    # ---- errors ------------------------------------------------------------------------
    def _first_error(self):
        field, message = next(iter(self.errors.items()))
        return field, message

    def _set_error(self, field: str, message: str | None) -> None:
        errors = dict(self.errors)
        if message:
            errors[field] = message
        else:
            errors.pop(field, None)
        if errors != self.errors:
            self.errors = errors

    def clear_error(self, field: str) -> None:
        self._set_error(field, None)

    def _guard(self, field: str, fn, *args, **kwargs):
        """Run ``fn``; on failure file the message under ``field`` and return None."""
        try:
            return fn(*args, **kwargs)
        except Exception as err:
            self.file_error(field, err)
            return None

    def file_error(self, field: str, err: Exception) -> None:
        """Show ``err`` next to ``field``: the engine's own message, or a short note.

        A method that cannot serve the model is filed under "method" whatever
        triggered the refit, since that is where the user can fix it. Anything
        that is not a ModelError is a fault of ours: its traceback goes to the
        server log, never to the page.
        """
        if isinstance(err, MethodNotApplicable):
            running = f" Still running: {self.sampler.method}." if self.sampler is not None else ""
            self._set_error("method", f"{self.method}: {err.reason}.{running}")
        elif isinstance(err, ModelError):
            self._set_error(field, str(err))
        else:
            log.error("unexpected error while handling %s", field, exc_info=err)
            self._set_error(field, f"could not use this input ({type(err).__name__}); "
                                   "details are in the server log")

    @contextlib.contextmanager
    def _quiet(self):
        """Change user parameters without triggering the refit they normally cause."""
        saved, self._busy = self._busy, True
        try:
            yield
        finally:
            self._busy = saved

    # ---- building the model and the sampler ---------------------------------------------
    def _adopt_scenario_settings(self, sc: Scenario) -> None:
        tol = min(TOLERANCES, key=lambda t: abs(math.log10(t) - math.log10(sc.tolerance)))
        method = sc.method if sc.method in self.param.method.objects else "auto"
        with self._quiet():
            self.param.update(method=method, tolerance=tol, seed=int(sc.seed), stop_at=STREAM_LIMIT)

    def fit_model(self, sc: Scenario, method: str | None = None) -> tuple:
        """Target, fitted sampler and cdf table of ``sc``'s model, and the seconds it took.
        Changes nothing in the state, so it may run in a worker thread (see ``background``)."""
        start = time.perf_counter()
        target = sc.target()
        sampler = fit(target, method or self.method, float(self.tolerance))
        probe = sampler.sample(min(20_000, max(self.batch_size, 2_000)), self._probe_seed())
        sampler.reset_counters()
        table = CdfTable(target, probe)
        return target, sampler, table, time.perf_counter() - start

    def _rebuild(self, sc: Scenario, field: str, built: tuple | None = None) -> bool:
        """Fit a sampler to ``sc``'s model (or take ``built``, fitted elsewhere); adopt it and
        restart the stream only if that works."""
        if built is None:
            built = self._guard(field, self.fit_model, sc)
        if built is None:
            self._show_running_method()
            return False
        self.target, self.sampler, self.table, seconds = built
        self.scenario = sc
        if sc.name in self.custom:
            self.custom[sc.name] = sc          # reselecting it later brings back its latest values
        self.last_refit_ms = 1e3 * seconds
        self._exact_life = None
        self._system_life = None
        self._geometry = None
        self._model_curve = None
        self._availability = None
        self._running_method = self.method
        # A working model settles every message about the inputs: the editor and the sliders now
        # show this model, the stream and the comparison start afresh. Only a failed report
        # (a folder, not the model) keeps its message.
        for f in [f for f in self.errors if f != "report"]:
            self._set_error(f, None)
        with self._quiet():
            self.values = {k: p.value for k, p in sc.parameters.items()}
        self.comparison = []
        self.comparison_note = ""
        self.version += 1      # before the first batch, so views redrawing on that batch see the new version
        self._restart()
        return True

    def _show_running_method(self) -> None:
        """After a refusal the method menu shows the method that actually runs (or auto)."""
        running = getattr(self, "_running_method", None)
        if running is not None and running != self.method:
            with self._quiet():
                self.method = running

    def method_availability(self) -> dict[str, str | None]:
        """Method name -> None if it can serve the current model, else the reason it cannot
        (each method's own applicability check; cached per model)."""
        if self._availability is None:
            from lifedraw.engine.methods import METHODS
            out: dict[str, str | None] = {"auto": None}
            for name, cls in METHODS.items():
                try:
                    cls.check_applicable(self.target)
                    out[name] = None
                except MethodNotApplicable as err:
                    out[name] = err.reason
                except ModelError as err:
                    out[name] = str(err)
            self._availability = out
        return self._availability

    def _probe_seed(self):
        # A stream of its own, so the probe that places the cdf nodes leaves the
        # user's seeded stream untouched.
        return np.random.SeedSequence(self.seed, spawn_key=(7,))

    def _restart(self, draw_first: bool = True) -> None:
        """Clear the draws and start again from the seed; draw the first batch now."""
        edges, self.view_right = histogram_edges(self.target, self.table)
        self._rng = np.random.default_rng(self.seed)
        self.sampler.reset_counters()
        self.acc = DrawAccumulator(edges, self.table, RESERVOIR_SIZE,
                                   np.random.SeedSequence(self.seed, spawn_key=(1,)))
        self.trace = {"n": [], "ks_p": [], "acceptance": []}
        if draw_first:
            self.step()
        else:
            self.batch += 1

    # ---- what the user does ---------------------------------------------------------------
    @param.depends("scenario_name", watch=True)
    def _on_scenario_name(self):
        if self._busy:
            return

        def load():
            if self.scenario_name in self.custom:
                return self.custom[self.scenario_name]
            return load_scenario(self.scenario_name)

        sc = self._guard("scenario", load)
        if sc is None:
            return
        saved = (self.method, self.tolerance, self.seed, self.stop_at)
        self._adopt_scenario_settings(sc)
        if not self._rebuild(sc, "scenario"):
            with self._quiet():
                self.param.update(method=saved[0], tolerance=saved[1], seed=saved[2], stop_at=saved[3])

    @param.depends("method", "tolerance", watch=True)
    def _on_generator(self):
        if self._busy:
            return
        self._rebuild(self.scenario, "method")

    @param.depends("seed", watch=True)
    def _on_seed(self):
        if self._busy:
            return
        self._set_error("run", None)
        self._restart()

    def set_value(self, name: str, value) -> bool:
        """Move one parameter: refit and restart the stream, or keep the last model and say why."""
        return self.set_values(**{name: value})

    def set_values(self, **values) -> bool:
        sc = self._guard("parameters", lambda: self.scenario.with_values(**values))
        if sc is None:
            return False
        return self._rebuild(sc, "parameters")

    def apply_formula(self, kind: str, expr: str, support: str = "0, inf", params: str = "") -> bool:
        """Replace the model by a density, hazard or CDF formula in t with named parameters."""
        def build():
            k = str(kind).strip().lower()
            if k not in FORMULA_KINDS:
                raise ModelError("kind", f"must be one of {', '.join(FORMULA_KINDS)}, got {kind!r}")
            if not str(expr).strip():
                raise ModelError("formula", "is empty; write a function of t, e.g. exp(-t/1000)")
            values = parse_assignments(params)
            model = {"kind": k, "expr": str(expr).strip(), "support": parse_support(support)}
            return self._custom_scenario(model, values, f"{k} formula")

        sc = self._guard("model", build)
        return sc is not None and self._adopt_custom(sc, "model")

    def apply_family(self, family: str, params: str) -> bool:
        """Replace the model by a textbook family; each of its parameters gets a slider."""
        def build():
            from lifedraw.engine.families import FAMILIES
            key = str(family or "").strip().lower().replace("-", "_").replace(" ", "_")
            if not key:
                raise ModelError("family", "choose a family from the menu")
            if key not in FAMILIES:
                raise ModelError("family", f"unknown family {family!r}; known: {', '.join(sorted(FAMILIES))}")
            values = parse_assignments(params)
            known = [p.name for p in FAMILIES[key].params]
            for name in values:
                if name not in known:
                    raise ModelError("parameters", f"{name!r} is not a parameter of the "
                                                   f"{FAMILIES[key].title} family ({', '.join(known)})")
            model = {"kind": "family", "family": key, "params": {k: k for k in values}}
            return self._custom_scenario(model, values, f"{FAMILIES[key].title} family")

        sc = self._guard("model", build)
        return sc is not None and self._adopt_custom(sc, "model")

    def load_field_data(self, data, filename: str = "field data.csv", time_unit: str | None = None,
                        mission_times: str | None = None) -> bool:
        """Use uploaded CSV field data (failure times with suspensions, or binned counts) as the model,
        with the time unit and mission times the user gives for it (else the current ones).
        The page runs the two steps before ``adopt_field_data`` in a worker thread instead."""
        sc = self._guard("upload", self.field_data_scenario, data, filename, time_unit, mission_times)
        built = sc and self._guard("upload", self.fit_model, sc, "auto")
        return built is not None and self.adopt_field_data(sc, built)

    def field_data_scenario(self, data, filename: str, time_unit: str | None = None,
                            mission_times: str | None = None) -> Scenario:
        """The scenario of uploaded field data (parsed and checked; raises ModelError). Changes nothing.
        ``time_unit`` and ``mission_times`` are what the user typed in the upload area."""
        from lifedraw.engine.field_io import read_binned_csv, read_failure_csv, sniff_layout
        unit = parse_time_unit(time_unit) if time_unit is not None else self.scenario.time_unit
        missions = (parse_mission_times(mission_times) if mission_times is not None
                    else list(self.scenario.mission_times))
        if sniff_layout(data) == "binned":
            edges, counts = read_binned_csv(data)
            model = {"kind": "histogram", "edges": edges.tolist(), "counts": counts.tolist(), "smooth": False}
            what = f"{counts.size} bins, {counts.sum():g} failures"
        else:
            times, censored = read_failure_csv(data)
            model = {"kind": "failures", "times": times.tolist(), "censored": censored.tolist()}
            what = f"{int((~censored).sum())} failures, {int(censored.sum())} suspensions"
        data_dict = {"title": f"Field data from {filename}",
                     "story": f"Uploaded field data ({what}), ages in {unit}.",
                     "time_unit": unit, "model": model,
                     "run": {"method": "auto", "seed": self.seed, "sample_size": self.scenario.sample_size,
                             "mission_times": missions, "tolerance": float(self.tolerance)}}
        stem = re.sub(r"[^A-Za-z0-9_-]+", "-", str(filename).rsplit(".", 1)[0]).strip("-") or "field-data"
        return scenario_from_dict(data_dict, stem)

    def adopt_field_data(self, sc: Scenario, built: tuple) -> bool:
        """Make the uploaded field data (``sc``, fitted as ``built`` by ``fit_model(sc, "auto")``) the model."""
        saved = self.method
        with self._quiet():
            self.method = "auto"
        if self._adopt_custom(sc, "upload", built):
            return True
        with self._quiet():
            self.method = saved
        return False

    def _adopt_custom(self, sc: Scenario, field: str, built: tuple | None = None) -> bool:
        """Use a scenario made in this session, and offer it in the scenario picker."""
        previous, known = self.scenario_name, self.custom.get(sc.name)
        self.custom[sc.name] = sc
        if sc.name not in self.param.scenario_name.objects:
            self.param.scenario_name.objects = [*self.param.scenario_name.objects, sc.name]
        with self._quiet():
            self.scenario_name = sc.name
        if self._rebuild(sc, field, built):
            return True
        with self._quiet():
            self.scenario_name = previous
        if known is None:
            del self.custom[sc.name]
        else:
            self.custom[sc.name] = known
        return False

    def _custom_scenario(self, model: dict, values: dict[str, float], what: str) -> Scenario:
        base = self.scenario
        params = {}
        for name, v in values.items():
            old = base.parameters.get(name)
            if old is not None and old.low <= v <= old.high:
                params[name] = {"value": v, "min": old.low, "max": old.high, "step": old.step,
                                **({"label": old.label} if old.label else {})}
            else:
                params[name] = v   # the scenario loader gives it a range around the value
        original = base.title.split(" — ")[0]
        # Say the model was edited; keep the original scenario's story, marked as such.
        marker = "The story of the original scenario: "
        original_story = base.story.split(marker, 1)[1] if marker in base.story else base.story.strip()
        story = (f"Edited in this session: the model is now a {what} typed in the editor, not the scenario's "
                 f"own model. {marker}{original_story}")
        data = {"title": f"{original} — edited model ({what})",
                "story": story, "time_unit": base.time_unit, "parameters": params, "model": model,
                "run": {"method": self.method, "seed": self.seed, "sample_size": base.sample_size,
                        "mission_times": list(base.mission_times), "tolerance": float(self.tolerance)}}
        name = base.name if base.name.endswith("-edited") else f"{base.name}-edited"
        return scenario_from_dict(data, name)

    # ---- the stream -------------------------------------------------------------------------
    @property
    def n(self) -> int:
        return self.acc.n if self.acc is not None else 0

    @property
    def done(self) -> bool:
        return self.n >= self.stop_at

    def start(self) -> None:
        if self.done:
            self._restart(draw_first=False)
        self.running = True

    def pause(self) -> None:
        self.running = False

    def reset(self) -> None:
        """Clear every draw and stop; the next start begins again from the seed."""
        self.running = False
        self._restart(draw_first=False)

    def step(self) -> int:
        """Draw one batch (bounded by ``stop_at``) and fold it into the histogram, reservoir and traces."""
        m = min(int(self.batch_size), self.stop_at - self.n)
        if m <= 0:
            self.running = False
            return 0
        x = self._guard("run", self.sampler.sample, m, self._rng)
        if x is None:
            self.running = False
            return 0
        self.acc.add(x)
        _, p = self.acc.ks()
        rate = self.sampler.stats.get("acceptance_rate")
        for key, v in (("n", self.n), ("ks_p", p), ("acceptance", math.nan if rate is None else rate)):
            self.trace[key].append(float(v))
            del self.trace[key][:-TRACE_LIMIT]
        if self.done:
            self.running = False
        self.batch += 1
        return m

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

    def effective_weights(self) -> list[dict]:
        """For a mixture: each weight as set (slider or fixed number) and as used, rescaled to add up to 1."""
        model = self.scenario.model
        if model.get("kind") != "mixture" or not hasattr(self.target, "weights"):
            return []
        out = []
        for i, (raw, used) in enumerate(zip(model.get("weights", []), self.target.weights)):
            if isinstance(raw, str) and raw in self.scenario.parameters:
                p = self.scenario.parameters[raw]
                out.append({"name": raw, "label": p.label or raw, "set": float(self.values.get(raw, p.value)),
                            "used": float(used)})
            else:
                out.append({"name": None, "label": f"component {i + 1} (fixed)", "set": float(raw),
                            "used": float(used)})
        return out

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

    def release(self) -> None:
        """The session has ended: stop, and let go of the draws and the tables derived from the model."""
        with self._quiet():
            self.running = False
        self.acc = self.table = self._geometry = self._model_curve = self._rng = None
        self._exact_life = self._system_life = None
        self._curves, self._availability = {}, None
        self.custom = {}
        self.trace = {"n": [], "ks_p": [], "acceptance": []}

    def current_scenario(self) -> Scenario:
        """The scenario as it stands now: current values, method, seed, tolerance and sample size."""
        return dataclasses.replace(self.scenario, method=self.method, seed=int(self.seed),
                                   tolerance=float(self.tolerance))

    def scenario_toml(self) -> str:
        return self.current_scenario().to_toml()


# ---- small parsers for the model editor --------------------------------------------------------

_ASSIGN = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*=\s*(\S.*?)\s*$")


def parse_assignments(text: str) -> dict[str, float]:
    """``"k = 2.5, s = 9000"`` (commas, semicolons or new lines) -> {"k": 2.5, "s": 9000.0}."""
    out: dict[str, float] = {}
    for part in re.split(r"[,;\n]", str(text or "")):
        if not part.strip():
            continue
        m = _ASSIGN.match(part)
        if not m:
            raise ModelError("parameters", f"{part.strip()!r} is not of the form name = number")
        name, raw = m.group(1), m.group(2)
        try:
            value = float(raw)
        except ValueError:
            raise ModelError("parameters", f"{name} = {raw!r}: not a number") from None
        if not math.isfinite(value):
            raise ModelError("parameters", f"{name} must be finite, got {raw}")
        if name in out:
            raise ModelError("parameters", f"{name} is given twice")
        out[name] = value
    return out


def parse_time_unit(text: str) -> str:
    """The time unit of uploaded data: a short word such as hours, days, cycles, km."""
    unit = str(text or "").strip()
    if not unit:
        raise ModelError("time unit", "say in which unit the ages are recorded, e.g. hours, days or cycles")
    if len(unit) > 24 or not re.fullmatch(r"[A-Za-z][A-Za-z0-9 ._/-]*", unit):
        raise ModelError("time unit", f"use a short word of letters (at most 24 characters), got {unit[:30]!r}")
    return unit


def parse_mission_times(text: str) -> list[float]:
    """``"8760, 17520"`` -> [8760.0, 17520.0]: positive ages, at most 10, empty for none."""
    out = []
    for part in re.split(r"[,;\s]+", str(text or "").strip()):
        if not part:
            continue
        try:
            value = float(part)
        except ValueError:
            raise ModelError("mission times", f"{part[:30]!r} is not a number") from None
        if not (math.isfinite(value) and value > 0):
            raise ModelError("mission times", f"each mission time must be a positive age, got {part}")
        out.append(value)
    if len(out) > 10:
        raise ModelError("mission times", f"give at most 10 mission times, got {len(out)}")
    return sorted(set(out))


def parse_support(text: str) -> list:
    """``"0, inf"`` -> [0.0, "inf"] (the scenario file's spelling of an open end)."""
    parts = [p.strip() for p in re.split(r"[,;]", str(text or "")) if p.strip()]
    if len(parts) != 2:
        raise ModelError("support", f"give two ends separated by a comma, e.g. 0, inf; got {text!r}")
    out = []
    for p in parts:
        low = p.lower()
        if low in ("inf", "+inf", "infinity"):
            out.append("inf")
        elif low in ("-inf", "-infinity"):
            out.append("-inf")
        else:
            try:
                out.append(float(p))
            except ValueError:
                raise ModelError("support", f"{p!r} is not a number (use inf for an open end)") from None
    return out


# ---- renamed names ------------------------------------------------------------------------------

def __getattr__(name: str):
    """``Workbench`` was this class's old name: it still works for one release, with a warning."""
    if name == "Workbench":
        warnings.warn("lifedraw.dashboard.state.Workbench is deprecated; use DrawingBoard",
                      DeprecationWarning, stacklevel=2)
        return DrawingBoard
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
