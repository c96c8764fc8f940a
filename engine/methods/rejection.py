"""Rejection from an automatic hat: piecewise-exponential upper and lower bounds of the
density, built from the concave and convex pieces of log f, with exact inversion at the ends.

Transformed density rejection with T = log (Gilks & Wild 1992, Appl. Statist. 41(2) 337-348;
Hörmann 1995, ACM TOMS 21(2) 182-193), generalised to log f that is concave on some pieces and
convex on others (Evans & Swartz 1998, J. Comput. Graph. Statist. 7(4) 514-528): on a concave
piece tangents of log f are the hat and chords the squeeze; on a convex piece the chord is the
hat and tangents the squeeze. Construction points are added by derandomised adaptive rejection
sampling (DARS; Leydold, Janka & Hörmann 2002, "Variants of transformed density rejection and
correlation induction", Monte Carlo and Quasi-Monte Carlo Methods 2000, 345-356).

The two ends of the support are cut off and drawn exactly by inversion (composition): a
pole at the lower end (mass POLE_MASS) and the tails beyond mass 0.01 * tolerance, so the
hat never relies on the shape of log f where it was not examined. Piece boundaries (the
inflexion points of log f, kinks declared by the model, jumps found by a scan) are located
numerically; a check of hat >= f >= squeeze on a dense grid in every interval follows. Every
hat is then lifted (every squeeze lowered) by the noise with which f can be computed (the
models' accuracy, and the slope times the spacing of doubles) plus twice any excess the
check found, which only rounding or the numerical slopes of a model without an exact f'
can leave; the stats report that excess ("check_excess") and any repairs.
"""
from __future__ import annotations

import time
from typing import Any

import numpy as np

from .. import table_checks
from ..errors import MethodNotApplicable, ModelError, finite_number
from ..target import Target
from .base import Sampler
from .rejection_drawing import HatDrawing
from .rejection_hat import BIG_EXCESS, CHECK_POINTS, DARS_FACTOR, F_NOISE, HatConstruction, exp_line_area
from .rejection_pictures import HatPictures
from .rejection_scan import (POLE_MASS, SCAN_MAX, SCAN_QUANTILES, SCAN_SPREAD, SCAN_TAIL, LogDensityScan,
                             declared_kinks, model_parts)

ACCEPTANCE = 0.9          # default goal for area(f) / area(hat)
MAX_POINTS = 200          # default budget of construction points
TIME_BUDGET = 0.5         # default set-up budget in seconds

__all__ = ["Rejection", "ACCEPTANCE", "MAX_POINTS", "TIME_BUDGET", "POLE_MASS", "DARS_FACTOR",
           "SCAN_QUANTILES", "SCAN_TAIL", "SCAN_SPREAD", "SCAN_MAX", "CHECK_POINTS", "BIG_EXCESS",
           "F_NOISE", "declared_kinks", "model_parts", "exp_line_area"]


class Rejection(HatDrawing, HatPictures, HatConstruction, LogDensityScan, Sampler):
    """Rejection from a piecewise-exponential hat with a squeeze, set up automatically.

    Needs a density that is positive and bounded between the ends of the support (a pole
    is allowed at the lower end, where the first POLE_MASS of probability is drawn by
    inversion). f' comes from ``target.dpdf`` when the model has an exact one, otherwise
    from a five-point difference of log f. Options: ``acceptance`` (goal for the
    acceptance rate, default 0.9), ``max_points`` (construction points, default 200),
    ``time_budget`` (set-up seconds, default 0.5); the stats say what was reached.
    """

    method = "rejection"
    reference = ("Transformed density rejection, T = log: Gilks & Wild (1992) Appl. Statist. 41(2); "
                 "Hörmann (1995) ACM TOMS 21(2):182-193; convex pieces: Evans & Swartz (1998) "
                 "JCGS 7(4); construction points: DARS, Leydold, Janka & Hörmann (2002)")

    def __init__(self, target: Target, tolerance: float = 1e-10, acceptance: float = ACCEPTANCE,
                 max_points: int = MAX_POINTS, time_budget: float = TIME_BUDGET):
        super().__init__(target, tolerance)
        self.acceptance = finite_number("acceptance", acceptance, low=0.05, high=0.999)
        points = finite_number("max_points", max_points, low=8, high=100_000)
        if points != int(points):
            raise ModelError("max_points", f"must be a whole number, got {max_points!r}")
        self.max_points = int(points)
        self.time_budget = finite_number("time_budget", time_budget, positive=True, high=600)

    # ---- applicability -------------------------------------------------------------------
    @classmethod
    def check_applicable(cls, target: Target) -> None:
        if target.atoms.size:
            raise MethodNotApplicable("method", "the model puts probability on single ages (atoms, as a "
                                                "product-limit estimate does); a hat over a density cannot "
                                                "produce them: use 'table' or 'inversion'")
        if any(getattr(p, "kind", "") == "histogram" for p in model_parts(target)):
            raise MethodNotApplicable("method", "binned data: its density breaks at every bin edge (constant "
                                                "within bins, or a smoothed cubic that vanishes in empty bins); "
                                                "'table' or 'inversion' draw it exactly")

    # ---- set-up ------------------------------------------------------------------------------
    def _setup(self) -> None:
        start = time.perf_counter()
        t = self.target
        self._exact_dpdf = t._dpdf_exact() is not None
        self._probe_quantiles()
        q = self._q
        self._median = float(q[0.5])
        self._spread = float(max((q[0.9] - q[0.1]) / 2.0, 1e-300, 1e-12 * abs(q[0.5])))
        self._kinks = declared_kinks(t)
        self._ends()
        self._kinks = self._kinks[(self._kinks > self.cL) & (self._kinks < self.cR)]
        pieces = self._scan()
        pts = self._initial_points(pieces)
        reached = self._refine(pts, start)
        self._check_and_lift(pts)
        self._finish(pts, pieces, reached)

    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        return self.hat_geometry(n_points, rng)

    _TABLES = ("seg_x0", "seg_x1", "seg_xa", "seg_ya", "seg_slope", "seg_qa", "seg_qslope", "seg_area",
               "points_x", "points_logf", "interval_labels", "piece_edges", "piece_convex")

    def _tables(self):
        return {k: getattr(self, k) for k in self._TABLES}

    def _meta(self):
        return {"acceptance": self.acceptance, "max_points": self.max_points, "time_budget": self.time_budget,
                "cL": self.cL, "cR": self.cR, "FL": self.FL, "SR": self.SR, "stats": dict(self.extra_stats)}

    def _restore(self, meta, tables):
        # Every table is checked before the drawing table is derived from it: a negative
        # or NaN area, or segments out of order, would make draws loop or go wrong.
        check = table_checks.table
        self.seg_x0 = check(tables, "seg_x0", nondecreasing=True)
        n = self.seg_x0.size
        self.seg_x1 = check(tables, "seg_x1", length=n)
        if np.any(self.seg_x1 < self.seg_x0):
            raise ModelError("path", "the sampler file's segments end before they start; the file is damaged")
        self.seg_xa = check(tables, "seg_xa", length=n)
        self.seg_ya = check(tables, "seg_ya", length=n)
        self.seg_slope = check(tables, "seg_slope", length=n)
        self.seg_qa = check(tables, "seg_qa", length=n, finite=False, high=np.inf)
        self.seg_qslope = check(tables, "seg_qslope", length=n)
        self.seg_area = check(tables, "seg_area", length=n, low=0.0)
        self.points_x = check(tables, "points_x", nondecreasing=True)
        self.points_logf = check(tables, "points_logf", length=self.points_x.size, finite=False)
        self.interval_labels = check(tables, "interval_labels", kind="int", low=-1, high=1,
                                     allow_empty=True).astype(np.int8)
        self.piece_edges = check(tables, "piece_edges", nondecreasing=True)
        self.piece_convex = check(tables, "piece_convex", kind="bool", allow_empty=True)
        number = table_checks.number
        self.acceptance = number(meta, "acceptance", low=0.0, high=1.0)
        self.max_points = number(meta, "max_points", low=0.0)
        self.time_budget = number(meta, "time_budget", low=0.0)
        self.cL, self.cR = number(meta, "cL"), number(meta, "cR")
        self.FL, self.SR = number(meta, "FL", low=0.0, high=1.0), number(meta, "SR", low=0.0, high=1.0)
        if np.any(np.isinf(self.seg_qa) & (self.seg_qa > 0)):
            raise ModelError("path", "the sampler file's 'seg_qa' table holds +inf; the file is damaged")
        # The hat's area is at least the density's (1); a smaller or non-finite one is not a hat.
        segment_total = self.FL + float(np.sum(self.seg_area)) + self.SR
        self._tabulate()
        if not (1.0 - 1e-6 <= min(self.total, segment_total) and max(self.total, segment_total) < 1e6):
            raise ModelError("path", f"the sampler file's hat has area {min(self.total, segment_total):g}, which cannot cover a "
                                     "density of area 1; the file is damaged")
        self.extra_stats.update(table_checks.mapping(meta, "stats"))
