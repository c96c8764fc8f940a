"""The face every sampling method shares: draw in vectorised batches from a numpy
Generator, count what the draws cost, describe the method's geometry, save tables.

Randomness follows numpy's model (one ``Generator`` passed in, ``default_rng`` at
the boundary, no global state); counters are incremented by counting, never by formula.
"""
from __future__ import annotations

import time
from typing import Any, ClassVar

import numpy as np

from ..errors import ModelError, random_generator, sample_size
from ..target import Target

# Draws are produced in chunks of this many values: large enough to amortise
# numpy's per-call overhead, small enough to keep the temporaries in cache.
CHUNK = 1 << 16

# Residual lives by rejection from the whole law where R(age) is at least this, for at most this
# many rounds (about 90 tries at R = 0.05 leave one unit in 100 to the exact inverse).
REJECTION_ABOVE = 0.05
REJECTION_ROUNDS = 90

COUNTER_NAMES = ("samples", "uniforms", "density_evals", "candidates", "accepted", "squeezed", "log_evals")


# A picture needs at most this many points; more only costs memory.
MAX_GEOMETRY_POINTS = 100_000


def _checked_geometry(geometry):
    import functools

    @functools.wraps(geometry)
    def checked(self, n_points: int = 400, rng=0):
        if isinstance(n_points, bool) or not isinstance(n_points, (int, np.integer)) or not (
                1 <= n_points <= MAX_GEOMETRY_POINTS):
            raise ModelError("n_points", f"must be a whole number from 1 to {MAX_GEOMETRY_POINTS:,} "
                                         f"(points of a picture), got {str(n_points)[:40]}")
        random_generator(rng, "rng")          # checked here; the method turns it into a Generator
        return geometry(self, int(n_points), rng)
    return checked


def check_tolerance(tolerance) -> float:
    try:
        tol = float(tolerance)
    except (TypeError, ValueError):
        raise ModelError("tolerance", f"must be a number, got {tolerance!r}") from None
    if not (1e-14 <= tol <= 1e-2):
        raise ModelError("tolerance", f"must lie between 1e-14 (double precision) and 1e-2, got {tol:g}")
    return tol


def check_output_buffer(out, n=None) -> np.ndarray:
    """The caller's buffer for ``sample(n, rng, out=...)``, checked; a flat view of it is returned."""
    if not isinstance(out, np.ndarray):
        raise ModelError("out", f"must be a numpy array, got {type(out).__name__}")
    if out.dtype != np.float64:
        raise ModelError("out", f"must have dtype float64, got {out.dtype}")
    if not out.flags.writeable:
        raise ModelError("out", "is read-only")
    if not out.flags.c_contiguous:
        raise ModelError("out", "must be C-contiguous (e.g. np.empty(n)), not a strided view")
    if n is not None and sample_size("n", n) != out.size:
        raise ModelError("out", f"holds {out.size} values but n = {n} draws were asked for")
    return out.reshape(-1)


def residual_ages(ages) -> np.ndarray:
    """Ages of units in service as a float array: finite and >= 0, or ModelError naming "ages"."""
    try:
        a = np.atleast_1d(np.asarray(ages, dtype=float))
    except (TypeError, ValueError):
        raise ModelError("ages", "must be a number or a list of numbers (ages in service)") from None
    if a.ndim != 1:
        raise ModelError("ages", f"must be one age per unit (a flat list), got shape {a.shape}")
    bad = np.flatnonzero(~np.isfinite(a) | (a < 0))
    if bad.size:
        i = int(bad[0])
        raise ModelError("ages", f"value {i + 1} is {a[i]!r}; ages are finite and >= 0")
    return a


def residual_by_rejection(draw, ages, survive, fresh, exact_tail, rng, *, rounds: int,
                          exact_below: float) -> np.ndarray:
    """Residual lives past ``ages`` by rejection: new lives are drawn until each exceeds its age (exact,
    and cheap where the survival ``survive`` = R(age) is not small). Units with R(age) below
    ``exact_below``, or still waiting after ``rounds``, get ``exact_tail(rows, v)`` with fresh uniforms v
    in (0, 1] (conditional inversion). ``fresh`` marks units of age zero: their draw is a new life."""
    out = np.empty(ages.shape)
    if fresh.any():
        out[fresh] = draw(int(fresh.sum()), rng) - ages[fresh]
    pending = np.flatnonzero(~fresh & (survive >= exact_below))
    for _ in range(rounds):
        if pending.size == 0:
            break
        life = draw(pending.size, rng)
        ok = life > ages[pending]
        out[pending[ok]] = life[ok] - ages[pending[ok]]
        pending = pending[~ok]
    rest = np.union1d(pending, np.flatnonzero(~fresh & (survive < exact_below)))
    if rest.size:
        out[rest] = exact_tail(rest, 1.0 - rng.random(rest.size))
    return out


class Sampler:
    """A method bound to a target, with its set-up done.

    Subclasses implement ``_fill(out, rng)`` or ``_draw(m, rng)`` (vectorised,
    updating the counters), ``_tables()``/``_meta()`` for saving and ``_restore`` for loading,
    and ``geometry()`` for pictures of the method.
    """

    method: ClassVar[str] = "abstract"

    def __init_subclass__(cls, **kwargs):
        # Every method's geometry() gets the same check of its size argument, in one place.
        super().__init_subclass__(**kwargs)
        if "geometry" in cls.__dict__:
            cls.geometry = _checked_geometry(cls.__dict__["geometry"])
    #: A one-line citation of the published method.
    reference: ClassVar[str] = ""

    def __init__(self, target: Target, tolerance: float = 1e-10):
        self.target = target
        self.tolerance = check_tolerance(tolerance)
        self.reason = ""
        self.setup_seconds = 0.0
        self.extra_stats: dict[str, Any] = {}
        self.reset_counters()

    # ---- construction ------------------------------------------------------------
    @classmethod
    def build(cls, target: Target, tolerance: float = 1e-10, **options) -> "Sampler":
        cls.check_applicable(target)
        start = time.perf_counter()
        sampler = cls(target, tolerance, **options)
        sampler._setup()
        sampler.setup_seconds = time.perf_counter() - start
        return sampler

    @classmethod
    def check_applicable(cls, target: Target) -> None:
        """Raise MethodNotApplicable (with the reason) if this method cannot serve ``target``."""

    def _setup(self) -> None:
        pass

    # ---- drawing -----------------------------------------------------------------
    def sample(self, n=None, rng=None, out: np.ndarray | None = None) -> np.ndarray:
        """Draw ``n`` lifetimes; ``rng`` is a seed, a SeedSequence or a numpy Generator.

        ``out`` follows numpy's convention: a preallocated, writeable, contiguous float64 array that
        receives the draws in place (and is returned); ``n`` may then be left out. The same seed gives
        the same numbers with or without ``out``.
        """
        out = check_output_buffer(out, n) if out is not None else np.empty(sample_size("n", n))
        n = out.size
        rng = random_generator(rng)
        for start in range(0, n, CHUNK):
            self._fill(out[start:start + CHUNK], rng)
        self.counts["samples"] += n
        return out

    #: Can this method invert the conditional law itself (one uniform per residual life)? Methods
    #: with their own inverse say so; otherwise a closed-form quantile of the target is enough.
    own_inverse: ClassVar[bool] = False

    def sample_residual(self, ages, rng=None) -> np.ndarray:
        """Remaining lives of units that have survived to ``ages`` (one per age).

        Where the method inverts (its own inverse, or a closed-form quantile of the target):
        conditional inversion X = F^-1(F(a) + U R(a)) - a, written from the upper tail as
        X = R^-1(V R(a)) - a with V = 1 - U in (0, 1], so units deep in the tail (R(a) tiny) keep
        their digits (Devroye 1986, Non-Uniform Random Variate Generation, II.2). Other methods
        draw from the whole law until a life exceeds the age (exact conditioning by rejection,
        Devroye 1986, II.3) where R(a) >= 0.05, and invert the target's exact R for the rest.
        """
        a = residual_ages(ages)
        rng = np.random.default_rng(rng)
        # A fleet repeats each age once per run: R is evaluated once per distinct age.
        distinct, where = np.unique(a, return_inverse=True)
        survive = np.asarray(self.target.sf(distinct), dtype=float).reshape(-1)[where]
        dead = np.flatnonzero(~(survive > 0))
        if dead.size:
            i = int(dead[0])
            raise ModelError("ages", f"age {float(a[i]):g} (unit {i + 1}) lies beyond every lifetime "
                                     "the model allows (reliability 0 there)")
        if self.own_inverse or self.target.exact_quantile:
            v = 1.0 - rng.random(a.shape)
            self.counts["uniforms"] += a.size
            self.counts["samples"] += a.size
            return self.residual_from_uniforms(a, v, survive)
        return self._residual_by_rejection(a, survive, rng)

    def _residual_by_rejection(self, a, survive, rng) -> np.ndarray:
        def exact_tail(rows, v):
            self.counts["uniforms"] += rows.size
            return self.residual_from_uniforms(a[rows], v, survive[rows])
        return residual_by_rejection(self.sample, a, survive, a <= self.target.support[0], exact_tail, rng,
                                     rounds=REJECTION_ROUNDS, exact_below=REJECTION_ABOVE)

    def residual_from_uniforms(self, ages: np.ndarray, v: np.ndarray, survive: np.ndarray) -> np.ndarray:
        """X = R^-1(v R(a)) - a for v in (0, 1] (see ``sample_residual``); ``survive`` = R(a)."""
        x = np.asarray(self.upper_inverse(v * survive, survive), dtype=float) - ages
        return np.maximum(x, np.maximum(self.target.support[0] - ages, 0.0))

    def upper_inverse(self, w: np.ndarray, survive: np.ndarray) -> np.ndarray:
        """R^-1(w): the target's inverse survival function (a closed form, or a safeguarded Newton
        solve of R(t) = w, which keeps the digits of tiny w). ``survive`` = R(a) for each w;
        methods with their own inverse may use it where R(a) keeps their u-error small. A law with
        atoms (failure records) is inverted by its exact generalised inverse F^-1(1 - w), which lands
        on the atoms themselves."""
        if self.target.atoms.size and self.target.exact_quantile:
            return self.target.quantile(1.0 - np.asarray(w, dtype=float))
        return self.target.isf(w)

    # A method implements one of these two: ``_fill`` if it can draw in place,
    # else ``_draw``; each default is written in terms of the other.
    def _fill(self, out: np.ndarray, rng: np.random.Generator) -> None:
        """Write out.size draws into ``out``."""
        out[:] = self._draw(out.size, rng)

    def _draw(self, m: int, rng: np.random.Generator) -> np.ndarray:
        """Return m new draws."""
        if type(self)._fill is Sampler._fill:
            raise NotImplementedError(f"{type(self).__name__} implements neither _fill nor _draw")
        out = np.empty(m)
        self._fill(out, rng)
        return out

    # ---- copies for parallel tasks ---------------------------------------------------
    def working_copy(self) -> "Sampler":
        """A copy for one task: it shares this sampler's set-up (the target and the tables, which
        nothing writes after set-up) and has its own counters and working state, so its draws never
        depend on what this sampler or its other copies drew before. It costs microseconds; a deep
        copy goes through the file format (``__reduce__``) and rebuilds the model, milliseconds
        that a thread holds the GIL for."""
        twin = object.__new__(type(self))
        twin.__dict__.update(self.__dict__)
        twin.extra_stats = dict(self.extra_stats)
        twin.reset_counters()
        twin._own_working_state()
        return twin

    def _own_working_state(self) -> None:
        """Replace, on a fresh working copy, any state beyond the counters that drawing changes
        (a method keeping scratch buffers, reserves or sub-samplers overrides this)."""

    # ---- counters ----------------------------------------------------------------
    def reset_counters(self) -> None:
        self.counts = {name: 0 for name in COUNTER_NAMES}

    @property
    def stats(self) -> dict[str, Any]:
        """What the method costs, measured by counting over all draws since the last reset."""
        c = self.counts
        n = max(c["samples"], 1)
        cand = c["candidates"]
        out = {
            "method": self.method,
            "setup_seconds": self.setup_seconds,
            "samples": c["samples"],
            "uniforms_per_sample": c["uniforms"] / n if c["samples"] else None,
            "density_evals_per_sample": c["density_evals"] / n if c["samples"] else None,
            "acceptance_rate": (c["accepted"] / cand) if cand else None,
            "squeeze_rate": (c["squeezed"] / cand) if cand else None,
            "table_bytes": self.table_bytes,
            "u_error": None,
            "tolerance": self.tolerance,
        }
        out.update(self.extra_stats)
        return out

    @property
    def table_bytes(self) -> int:
        return int(sum(a.nbytes for a in self._tables().values()))

    # ---- pictures and persistence --------------------------------------------------
    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        """Plain arrays that a picture of the method needs (keys depend on the method)."""
        return {"method": self.method}

    def _tables(self) -> dict[str, np.ndarray]:
        return {}

    def _meta(self) -> dict[str, Any]:
        return {}

    def _restore(self, meta: dict[str, Any], tables: dict[str, np.ndarray]) -> None:
        self._setup()

    def save(self, path) -> None:
        """Write this sampler to ``path`` (see ``engine.storage`` for the format)."""
        from ..storage import save_sampler
        save_sampler(self, path)

    def __reduce__(self):
        # Pickle through the portable file format: targets hold compiled formula
        # closures that pickle cannot carry, the file's spec and tables can.
        from ..storage import dumps, loads
        return loads, (dumps(self),)

    def __repr__(self) -> str:
        return f"<{type(self).__name__} method={self.method!r} target={self.target!r}>"
