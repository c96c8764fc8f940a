"""Drawing from the hat: flat steps and exponential rows picked by a guide table, one uniform
per candidate with immediate acceptance below each row's squeeze floor, exact inversion beyond.

Rejection with a squeeze and recycled uniforms (Hörmann, Leydold & Derflinger 2004, Automatic
Nonuniform Random Variate Generation, sec. 2.3 and ch. 4); guide table: Chen & Asau (1974).
"""
from __future__ import annotations

import math
import threading

import numpy as np

from .. import kernels
from ..errors import sample_size
from .base import check_output_buffer


# A flat step of the hat may drop log f by at most this (its area then exceeds the
# exponential segment's under it by at most a factor y / (1 - exp(-y)) ~ 1 + y/2).
STEP_LOG_DROP = 0.02
MAX_STEPS = 64            # per segment; a steeper segment keeps its exponential row


def drawing_rows(x0, x1, xa, ya, slope, qa, qslope, seg_area, outside_mass, goal):
    """The hat as drawn: each exponential segment either cut into equal flat steps (a
    constant hat at the segment's higher end of each step, so a candidate's position is
    a linear function of its uniform and no logarithm is needed: immediate acceptance
    below the squeeze then costs a multiply and two compares; cf. the step hats of
    ziggurat methods, Marsaglia & Tsang 2000, J. Stat. Softw. 5(8)), or kept whole.

    A constant hat above the exponential one is still a hat, so draws stay exact. The
    steps may cost acceptance only while the goal stays met: the drop per step is the
    smaller of STEP_LOG_DROP and what the slack between 1/goal and the exponential hat's
    area allows; with no slack (a budget stopped the construction) no segment is cut.
    Rows: width, xa (anchor), dir (+1 or -1 from the anchor), ya (log hat at the
    anchor), g (log-hat slope away from the anchor, <= 0), qa/qslope (log squeeze at
    the anchor, slope in x), area.
    """
    width = x1 - x0
    drop = np.abs(slope) * width
    hat_mass = float(np.sum(seg_area))
    slack = 1.0 / goal - (outside_mass + hat_mass)
    allowed = 0.9 * 2.0 * slack / hat_mass if hat_mass > 0 else 0.0
    step = min(STEP_LOG_DROP, allowed)
    with np.errstate(divide="ignore", invalid="ignore"):
        m = np.where(step > 0, np.ceil(drop / step), np.inf)
    cut = np.isfinite(m) & (m <= MAX_STEPS) & (width > 0) & np.isfinite(drop)
    m = np.where(cut, np.maximum(m, 1.0), 1.0).astype(np.int64)
    seg = np.repeat(np.arange(width.size), m)
    first = np.repeat(np.cumsum(m) - m, m)
    i = np.arange(seg.size) - first
    mm = m[seg]
    left = x0[seg] + width[seg] * (i / mm)
    right = np.where(i + 1 == mm, x1[seg], x0[seg] + width[seg] * ((i + 1) / mm))
    s, a = slope[seg], xa[seg]
    with np.errstate(invalid="ignore", over="ignore"):
        # The constant is the exponential hat at the step's higher end (a line's maximum
        # over an interval sits at an end), so it lies on or above the hat everywhere in it.
        top = ya[seg] + np.maximum(s * (left - a), s * (right - a))
        q_left = qa[seg] + qslope[seg] * (left - a)
    flat = cut[seg]
    row_width = np.where(flat, right - left, width[seg])
    with np.errstate(over="ignore"):
        flat_area = np.exp(top) * row_width
    return {
        "width": row_width,
        "xa": np.where(flat, left, a),
        "dir": np.where(flat, 1.0, np.where(s <= 0, 1.0, -1.0)),
        "ya": np.where(flat, top, ya[seg]),
        "g": np.where(flat, 0.0, -np.abs(s)),
        "qa": np.where(flat, np.where(np.isfinite(q_left), q_left, -np.inf), qa[seg]),
        "qslope": qslope[seg],
        "area": np.where(flat, flat_area, seg_area[seg]),
    }


class HatDrawing:
    """The drawing half of ``Rejection`` (mixed in): needs the segment tables ``seg_*``,
    ``FL``/``SR`` and ``target``; ``_tabulate`` derives what the drawing loop reads."""

    def _tabulate(self) -> None:
        """The drawing table: one row per piece, [left inversion, hat rows..., right
        inversion], with the cumulative areas that pick a piece and the constants that
        invert its hat (see ``drawing_rows`` for the flat steps that replace most segments)."""
        rows = drawing_rows(self.seg_x0, self.seg_x1, self.seg_xa, self.seg_ya, self.seg_slope, self.seg_qa,
                            self.seg_qslope, self.seg_area, self.FL + self.SR, self.acceptance)
        area = np.concatenate([[self.FL], rows["area"], [self.SR]])
        self.cum = np.cumsum(area)
        self.total = float(self.cum[-1])
        self.flat_share = float(np.sum(rows["area"][rows["g"] == 0.0]) / self.total)
        pad = lambda a, fill=0.0: np.concatenate([[fill], a, [fill]])  # noqa: E731
        width, g = rows["width"], rows["g"]
        y = g * width
        small = y > -1e-12
        table = np.column_stack([
            self.cum - area,                                        # 0 start of the piece's share
            1.0 / np.where(area > 0, area, 1.0),                    # 1
            pad(width),                                             # 2
            pad(np.where(small, 0.0, np.expm1(y))),                 # 3 expm1(g w)
            pad(np.where(small, 0.0, 1.0 / np.where(small, 1.0, g))),  # 4 1/g
            pad(small.astype(float), 1.0),                          # 5
            pad(rows["xa"]),                                        # 6
            pad(rows["dir"]),                                       # 7 direction from the anchor
            pad(rows["ya"]),                                        # 8
            pad(g),                                                 # 9
            pad(rows["qa"], -np.inf),                               # 10
            pad(rows["qslope"]),                                    # 11
        ])
        # 12: the least squeeze/hat ratio on each row. log(squeeze/hat) is linear
        # in x there, so the least value sits at an end; v below it is accepted by the
        # squeeze without evaluating exp (a squeeze of the squeeze, exact by linearity).
        D = np.stack([np.zeros_like(width), width])
        xs = rows["xa"] + rows["dir"] * D
        with np.errstate(invalid="ignore", over="ignore"):
            gap = (rows["qa"] + rows["qslope"] * (xs - rows["xa"])) - (rows["ya"] + g * D)
            floor_ratio = np.exp(np.minimum(np.min(gap, axis=0), 0.0))
        floor_ratio = np.where(np.isfinite(floor_ratio), floor_ratio, 0.0) * (1.0 - 1e-12)
        # 13, 14: 1/r and 1/(1 - r), to split the position's uniform at the floor r.
        with np.errstate(divide="ignore"):
            inv_floor = np.where(floor_ratio > 0, 1.0 / np.where(floor_ratio > 0, floor_ratio, 1.0), 0.0)
        table = np.column_stack([table, pad(floor_ratio), pad(inv_floor), pad(1.0 / (1.0 - floor_ratio), 1.0)])
        self._table = np.ascontiguousarray(table)
        # The last piece with mass (u * total can round up to total), and a guide
        # table over the cumulative areas: guide[j] = first piece whose end exceeds
        # j/G of the total (Chen & Asau 1974). Derived here, not saved.
        self._last = self.cum.size - 1 if self.SR > 0 else self.cum.size - 2
        levels = np.arange(4 * self.cum.size) / (4 * self.cum.size) * self.total
        self._guide = np.searchsorted(self.cum, levels, side="right").astype(np.int64)

    # ---- drawing ----------------------------------------------------------------------------------
    def _candidate_pass(self, u, v, x, loghat, status):
        """The numpy twin of ``kernels.hat_propose``: the same arithmetic, array by array
        (see the kernel for what each output holds); returns the counts of statuses 0..3."""
        n = u.size
        uA = u * self.total
        k = np.minimum(np.searchsorted(self.cum, uA, side="right"), self._last)
        row = self._table[k]
        # The position's uniform is recycled from the one that chose the row (Hörmann,
        # Leydold & Derflinger 2004, sec. 2.3), and split once more at the row's squeeze
        # floor r: below it the candidate is accepted at once (immediate acceptance).
        w = np.minimum(np.maximum((uA - row[:, 0]) * row[:, 1], 0.0), 1.0)
        r = row[:, 12]
        at_once = w < r
        with np.errstate(all="ignore"):
            w = np.where(at_once, w * row[:, 13], (w - r) * row[:, 14])
            w = np.minimum(np.maximum(w, 0.0), 1.0)
            width = row[:, 2]
            # Inverse cdf of exp(g * D) on [0, width], D measured from the hat's higher end.
            D = np.where(row[:, 5] > 0, w * width, np.log1p(w * row[:, 3]) * row[:, 4])
            D = np.minimum(np.maximum(D, 0.0), width)
            x[:] = row[:, 6] + row[:, 7] * D
            loghat[:] = row[:, 8] + row[:, 9] * D
            ratio = np.minimum(row[:, 10] + row[:, 11] * (x - row[:, 6]) - loghat, 0.0)
        status[:] = np.where(k == 0, 2, np.where(k == self.cum.size - 1, 3, np.where(at_once, 0, 1)))
        undecided = status == 1
        u[undecided] = ratio[undecided]
        v[undecided] = r[undecided]
        return np.bincount(status, minlength=4)[:4].astype(np.int64) if n else np.zeros(4, np.int64)

    def _round(self, n, rng, out, got):
        """One round of n candidates: each costs one uniform; the few above their row's
        squeeze floor take a second for the height, then the squeeze, then the density.
        Accepted draws go straight into ``out`` (from ``got`` on); returns the count."""
        u, v, x, loghat, status = self._scratch(n)
        rng.random(out=u)
        used = n
        if kernels.HAVE_JIT:
            counts = kernels.hat_propose(u, v, self.cum, self._guide, self.total, self._last, self._table,
                                         x, loghat, status)
        else:
            counts = self._candidate_pass(u, v, x, loghat, status)
        for side, code in ((0, 2), (1, 3)):
            if counts[code]:
                mask = status == code
                x[mask], extra = self._end_draws(side, int(counts[code]), rng)
                used += extra
        idx = np.flatnonzero(status == 1)
        # The height of an undecided candidate is uniform on [r h(x), h(x)].
        height = v[idx] + rng.random(idx.size) * (1.0 - v[idx])
        used += idx.size
        with np.errstate(over="ignore", invalid="ignore"):
            squeezed = height <= np.exp(u[idx])
        test = idx[~squeezed]
        with np.errstate(over="ignore", invalid="ignore"):
            ok = height[~squeezed] * np.exp(loghat[test]) <= self.target.pdf(x[test])
        status[idx[squeezed]] = 0
        status[test[ok]] = 4                          # accepted after the density test
        c = self.counts
        c["uniforms"] += used
        c["candidates"] += n
        c["accepted"] += n - idx.size + int(squeezed.sum()) + int(ok.sum())
        c["squeezed"] += int(counts[0]) + int(squeezed.sum())
        c["density_evals"] += int(test.size)
        if kernels.HAVE_JIT:
            return kernels.take_accepted(x, status, out, got)
        keep = x[status != 1][:out.size - got]
        out[got:got + keep.size] = keep
        return int(keep.size)

    def _end_draws(self, side, count, rng):
        """``count`` exact draws beyond the hat (side 0: below cL by quantile, 1: above cR by
        isf), and the uniforms spent. A model without a closed-form inverse pays a root
        search per call, so during one ``sample`` call draws for the whole call are made
        at once and kept in a reserve (iid, so using them later changes no law)."""
        mass = self.FL if side == 0 else self.SR
        invert = self.target.quantile if side == 0 else self.target.isf
        reserve = getattr(self, "_reserve", None)
        if reserve is None:
            return invert(rng.random(count) * mass), count
        spent = 0
        if reserve[side].size < count:
            expected = self._remaining * mass / self.total
            batch = count + int(1.2 * expected + 4.0 * math.sqrt(expected)) + 8
            reserve[side] = np.concatenate([reserve[side], invert(rng.random(batch) * mass)])
            spent = batch
        out, reserve[side] = reserve[side][:count], reserve[side][count:]
        return out, spent

    def sample(self, n=None, rng=None, out: np.ndarray | None = None) -> np.ndarray:
        self._reserve = [np.empty(0), np.empty(0)]
        self._remaining = check_output_buffer(out, n).size if out is not None else sample_size("n", n)
        try:
            return super().sample(n, rng, out=out)
        finally:
            self._reserve = None

    def _scratch(self, n):
        """Work arrays reused across rounds (fresh large arrays cost page faults on
        every round); one set per thread, so a sampler shared by threads stays safe."""
        local = self.__dict__.setdefault("_local", threading.local())
        buf = getattr(local, "buf", None)
        if buf is None or buf[0].size < n:
            size = max(n, 1 << 16)
            local.buf = buf = (np.empty(size), np.empty(size), np.empty(size), np.empty(size),
                               np.empty(size, dtype=np.int8))
        return tuple(b[:n] for b in buf)

    def _fill(self, out, rng):
        m = out.size
        got = 0
        while got < m:
            # The accepted count of n candidates is binomial(n, 1/total): four of its standard
            # deviations more than the mean need make a second round rare (~3e-5) while
            # proposing ~0.2% surplus, not 2%.
            expected = (m - got) * self.total
            n = int(expected + 4.0 * math.sqrt(expected) + 16)
            got += self._round(n, rng, out, got)
        if getattr(self, "_reserve", None) is not None:
            self._remaining -= m
