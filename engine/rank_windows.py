"""Value windows that hold the wanted order statistics of a sample of known size, planned from
its first chunks, so that one pass keeps only the draws near the wanted ranks.

A chunk's empirical quantile misses the population's by about sqrt(f(1 - f)/m) in probability
(the uniform order statistic U_(i) of m is Beta(i, m - i + 1); David & Nagaraja, Order
Statistics, 2003, §2.2, from memory). A window reaching WINDOW_Z such standard errors beyond
the wanted ranks on each side therefore holds them unless the first chunks mislead (about
Φ(-5) = 3e-7 per side for chunks drawn alike); the pass's counts below and inside each window
say whether it did, so the values found are exact either way and a miss only costs more passes.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Half-width of a window, in standard errors of the pilot's quantile estimate, beyond the
#: wanted ranks on each side. Smaller means fewer draws kept and more misses (each miss
#: costs two more passes, never a wrong value); 0 makes windows that almost always miss.
WINDOW_Z = 5.0


@dataclass(frozen=True)
class RankGroup:
    """Neighbouring wanted ranks that share one window: fractions of the sample and the
    window's half-width in probability for the pooled pilot."""

    ranks: tuple
    f_lo: float
    f_hi: float
    half: float


@dataclass(frozen=True)
class WindowPlan:
    """Where to look in each pilot chunk, and how to turn what is found there into windows."""

    n: int
    groups: tuple
    pilots: int

    def positions(self, m: int) -> np.ndarray:
        """Ranks (0-based) to read in a pilot chunk of ``m`` draws, four per group: the
        window's lower end, the lowest and highest wanted rank, the window's upper end.
        A position outside the chunk (-1 or m) means an open end."""
        out = []
        widen = math.sqrt(self.pilots)      # one chunk's own error is sqrt(pilots) times the pool's
        for g in self.groups:
            out += [max(math.floor(m * (g.f_lo - g.half * widen)) - 1, -1),
                    min(math.floor(m * g.f_lo), m - 1), min(math.ceil(m * g.f_hi), m - 1),
                    min(math.ceil(m * (g.f_hi + g.half * widen)) + 1, m)]
        return np.array(out, dtype=np.int64)

    def windows(self, picked) -> "Windows | None":
        """Windows from the values at ``positions`` of every pilot chunk (-inf / +inf at open
        ends). None when the pilot chunks disagree (a window of one misses another's
        estimate entirely), a sign that the chunks are not alike, e.g. sorted data."""
        values = np.array(picked, dtype=np.float64).reshape(len(picked), len(self.groups), 4)
        if not np.all(np.isfinite(values[:, :, 1:3])):
            return None
        lows, highs = [], []
        with np.errstate(over="ignore", invalid="ignore"):
            for g in range(len(self.groups)):
                end_lo, centre_lo, centre_hi, end_hi = values[:, g, 0], values[:, g, 1], values[:, g, 2], values[:, g, 3]
                if np.max(end_lo) > np.min(end_hi):
                    return None
                # The pool's estimate is the mean of the chunks' (each chunk's error shrinks by
                # sqrt(pilots) in the mean), and so is its reach.
                shrink = math.sqrt(len(values))
                lows.append(np.mean(centre_lo) - np.mean(centre_lo - end_lo) / shrink)
                highs.append(np.mean(centre_hi) + np.mean(end_hi - centre_hi) / shrink)
        lo, hi = np.array(lows), np.array(highs)
        if np.any(np.isnan(lo)) or np.any(np.isnan(hi)):
            return None
        return Windows.merged(lo, hi)

    def expected_kept(self) -> float:
        """Draws the windows hold, on average, when the chunks are alike."""
        return sum(min(1.0, g.f_hi - g.f_lo + 2.0 * g.half) for g in self.groups) * self.n


def plan_windows(ranks, n: int, pilot_sizes) -> WindowPlan:
    """Group the wanted 0-based ``ranks`` of ``n`` draws whose windows would overlap, for a
    pilot of chunks of ``pilot_sizes`` draws."""
    pooled = float(sum(pilot_sizes))
    groups, current = [], None
    for k in sorted(set(int(r) for r in ranks)):
        f = (k + 0.5) / n
        # The pool's quantile against the whole sample's (of which it is a part): both err.
        half = WINDOW_Z * math.sqrt(f * (1.0 - f) * (1.0 / pooled + 1.0 / n)) + 1.0 / pooled
        if current is not None and f - half <= current.f_hi + current.half:
            current = RankGroup(current.ranks + (k,), current.f_lo, f, max(current.half, half))
        else:
            if current is not None:
                groups.append(current)
            current = RankGroup((k,), f, f, half)
    if current is not None:
        groups.append(current)
    return WindowPlan(n, tuple(groups), len(pilot_sizes))


@dataclass(frozen=True)
class Windows:
    """Sorted, disjoint closed value windows [lo[w], hi[w]]."""

    lo: np.ndarray
    hi: np.ndarray

    @classmethod
    def none(cls) -> "Windows":
        return cls(np.empty(0), np.empty(0))

    @classmethod
    def merged(cls, lo, hi) -> "Windows":
        order = np.argsort(lo, kind="stable")
        out_lo, out_hi = [], []
        for a, b in zip(np.asarray(lo)[order], np.asarray(hi)[order]):
            if out_hi and a <= out_hi[-1]:
                out_hi[-1] = max(out_hi[-1], b)
            else:
                out_lo.append(a)
                out_hi.append(b)
        return cls(np.array(out_lo, dtype=np.float64), np.array(out_hi, dtype=np.float64))

    def locate(self, ranks, below, inside) -> tuple[dict, list]:
        """Which wanted ranks lie inside a window, by the pass's exact counts: rank -> position
        among the kept draws sorted (window w's draws follow those of the windows before it),
        and the ranks that lie outside every window."""
        starts = np.concatenate([[0], np.cumsum(inside)])
        found, missed = {}, []
        for k in ranks:
            w = [i for i in range(self.lo.size) if below[i] <= k < below[i] + inside[i]]
            if w:
                found[k] = int(starts[w[0]] + k - below[w[0]])
            else:
                missed.append(k)
        return found, missed
