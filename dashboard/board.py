"""One browser session's state: what the user chose (param parameters) and the stream of draws
from the fitted sampler; refits keep the last valid model and file messages by field (ModelError)."""
from __future__ import annotations

import contextlib
import logging
import math
import time

import numpy as np
import param

from lifedraw.engine import ModelError, fit
from lifedraw.engine.errors import MethodNotApplicable
from lifedraw.engine.methods import method_names
from lifedraw.engine.scenarios import DEFAULT_SCENARIO, Scenario, load_scenario, scenario_names

from .board_data import BoardData
from .cdf_table import CdfTable, histogram_edges
from .draw_accumulator import DrawAccumulator, RESERVOIR_SIZE
from .model_editing import ModelEditing


log = logging.getLogger("lifedraw.dashboard")
TRACE_LIMIT = 5_000
TOLERANCES = (1e-6, 1e-8, 1e-10, 1e-12)
#: Start streams until Pause (or this many draws): far above any first batch.
STREAM_LIMIT = 50_000_000
#: The number of draws a user means to take, which decides the method comparison's winner.
PLANNED_DRAWS = (10_000, 100_000, 1_000_000, 10_000_000, 100_000_000, 1_000_000_000)


# ---- the drawing board -----------------------------------------------------------------------

# Errors are filed by group ("scenario", "model", "upload", "parameters", "method", "run",
# "comparison", "report"); the page shows each group next to its controls.


class DrawingBoard(ModelEditing, BoardData, param.Parameterized):
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

    def release(self) -> None:
        """The session has ended: stop, and let go of the draws and the tables derived from the model."""
        with self._quiet():
            self.running = False
        self.acc = self.table = self._geometry = self._model_curve = self._rng = None
        self._exact_life = self._system_life = None
        self._curves, self._availability = {}, None
        self.custom = {}
        self.trace = {"n": [], "ks_p": [], "acceptance": []}


