"""Drawing from the hat: the table of pieces, a guide table to pick one, inversion of its
exponential segment, the squeeze and density tests, exact inversion beyond the hat's ends.

Rejection with a squeeze (Hörmann, Leydold & Derflinger 2004, Automatic Nonuniform Random
Variate Generation, ch. 4 and sec. 2.3 for the recycled uniform); guide table: Chen & Asau (1974).
"""
from __future__ import annotations

import math
import threading

import numpy as np

from .. import kernels
from ..errors import sample_size
from .base import check_output_buffer


class HatDrawing:
    """The drawing half of ``Rejection`` (mixed in): needs the segment tables ``seg_*``,
    ``FL``/``SR`` and ``target``; ``_tabulate`` derives what the drawing loop reads."""

    def _tabulate(self) -> None:
        """The drawing table: one row per piece, [left inversion, hat segments..., right
        inversion], with the cumulative areas that pick a piece and the constants that
        invert its exponential hat."""
        area = np.concatenate([[self.FL], self.seg_area, [self.SR]])
        self.cum = np.cumsum(area)
        self.total = float(self.cum[-1])
        pad = lambda a, fill=0.0: np.concatenate([[fill], a, [fill]])  # noqa: E731
        width = self.seg_x1 - self.seg_x0
        g = -np.abs(self.seg_slope)
        y = g * width
        small = y > -1e-12
        table = np.column_stack([
            self.cum - area,                                        # 0 start of the piece's share
            1.0 / np.where(area > 0, area, 1.0),                    # 1
            pad(width),                                             # 2
            pad(np.where(small, 0.0, np.expm1(y))),                 # 3 expm1(g w)
            pad(np.where(small, 0.0, 1.0 / np.where(small, 1.0, g))),  # 4 1/g
            pad(small.astype(float), 1.0),                          # 5
            pad(self.seg_xa),                                       # 6
            pad(np.where(self.seg_slope <= 0, 1.0, -1.0)),          # 7 direction from the anchor
            pad(self.seg_ya),                                       # 8
            pad(g),                                                 # 9
            pad(self.seg_qa, -np.inf),                              # 10
            pad(self.seg_qslope),                                   # 11
        ])
        # 12: the least squeeze/hat ratio on each segment. log(squeeze/hat) is linear
        # in x there, so the least value sits at an end; v below it is accepted by the
        # squeeze without evaluating exp (a squeeze of the squeeze, exact by linearity).
        D = np.stack([np.zeros_like(width), width])
        xs = self.seg_xa + np.where(self.seg_slope <= 0, 1.0, -1.0) * D
        with np.errstate(invalid="ignore", over="ignore"):
            gap = (self.seg_qa + self.seg_qslope * (xs - self.seg_xa)) - (self.seg_ya + g * D)
            floor_ratio = np.exp(np.minimum(np.min(gap, axis=0), 0.0))
        floor_ratio = np.where(np.isfinite(floor_ratio), floor_ratio, 0.0) * (1.0 - 1e-12)
        table = np.column_stack([table, pad(floor_ratio)])
        self._table = np.ascontiguousarray(table)
        # The last piece with mass (u * total can round up to total), and a guide
        # table over the cumulative areas: guide[j] = first piece whose end exceeds
        # j/G of the total (Chen & Asau 1974). Derived here, not saved.
        self._last = self.cum.size - 1 if self.SR > 0 else self.cum.size - 2
        levels = np.arange(2 * self.cum.size) / (2 * self.cum.size) * self.total
        self._guide = np.searchsorted(self.cum, levels, side="right").astype(np.int64)

    # ---- drawing ----------------------------------------------------------------------------------
    def _propose(self, n, rng):
        """n candidates: (x, v, log hat, log squeeze, exact) where ``exact`` marks draws made
        by inversion beyond the hat; plus the number of uniforms used."""
        u = rng.random(n)
        v = rng.random(n)
        used = 2 * n
        uA = u * self.total
        k = np.minimum(np.searchsorted(self.cum, uA, side="right"), self._last)
        row = self._table[k]
        # The position's uniform is recycled from the one that chose the piece (Hörmann,
        # Leydold & Derflinger 2004, Automatic Nonuniform Random Variate Generation, sec. 2.3).
        w = np.minimum(np.maximum((uA - row[:, 0]) * row[:, 1], 0.0), 1.0)
        width = row[:, 2]
        with np.errstate(all="ignore"):
            # Inverse cdf of exp(g * D) on [0, width], D measured from the hat's higher end.
            D = np.where(row[:, 5] > 0, w * width, np.log1p(w * row[:, 3]) * row[:, 4])
        D = np.minimum(np.maximum(D, 0.0), width)
        x = row[:, 6] + row[:, 7] * D
        loghat = row[:, 8] + row[:, 9] * D
        logsq = row[:, 10] + row[:, 11] * (x - row[:, 6])
        exact = (k == 0) | (k == self.cum.size - 1)
        if np.any(exact):
            for side, mask in ((0, k == 0), (1, k == self.cum.size - 1)):
                if np.any(mask):
                    x[mask], extra = self._end_draws(side, int(mask.sum()), rng)
                    used += extra
        return x, v, loghat, logsq, exact, used

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

    def _decide(self, x, v, loghat, logsq, exact):
        """Accepted mask, squeeze-accepted mask and density-evaluated mask."""
        with np.errstate(invalid="ignore", over="ignore"):
            squeezed = ~exact & (v <= np.exp(np.minimum(logsq - loghat, 0.0)))
        test = ~exact & ~squeezed
        accepted = exact | squeezed
        if np.any(test):
            f = self.target.pdf(x[test])
            accepted[test] = v[test] * np.exp(loghat[test]) <= f
        return accepted, squeezed, test

    def _compiled_round(self, n, rng, out, got):
        """One round of n candidates through the compiled pass (engine.kernels): the
        verdicts are the numpy pass's, written straight into ``out``; returns the count."""
        u, v, x, loghat, status = self._scratch(n)
        rng.random(out=u)
        rng.random(out=v)
        used = 2 * n
        counts = kernels.hat_propose(u, v, self.cum, self._guide, self.total, self._last, self._table,
                                     x, loghat, status)
        for side, code in ((0, 2), (1, 3)):
            if counts[code]:
                mask = status == code
                x[mask], extra = self._end_draws(side, int(counts[code]), rng)
                used += extra
        tested = int(counts[1])
        passed = 0
        if tested:
            idx = np.flatnonzero(status == 1)
            ok = v[idx] * np.exp(loghat[idx]) <= self.target.pdf(x[idx])
            status[idx[ok]] = 4                      # accepted after the density test
            passed = int(ok.sum())
        c = self.counts
        c["uniforms"] += used
        c["candidates"] += n
        c["accepted"] += n - tested + passed
        c["squeezed"] += int(counts[0])
        c["density_evals"] += tested
        return kernels.take_accepted(x, status, out, got)

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
            need = m - got
            n = int(need * self.total * 1.02) + 16
            if kernels.HAVE_JIT:
                got += self._compiled_round(n, rng, out, got)
                continue
            x, v, loghat, logsq, exact, used = self._propose(n, rng)
            accepted, squeezed, tested = self._decide(x, v, loghat, logsq, exact)
            c = self.counts
            c["uniforms"] += used
            c["candidates"] += n
            c["accepted"] += int(accepted.sum())
            c["squeezed"] += int(squeezed.sum())
            c["density_evals"] += int(tested.sum())
            keep = x[accepted][:need]
            out[got:got + keep.size] = keep
            got += keep.size
        if getattr(self, "_reserve", None) is not None:
            self._remaining -= m

