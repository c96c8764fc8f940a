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
        # 32 cells per row keep the search after the look-up a rare, predictable step
        # (as for numerical inversion; the table still fits the core's fast caches).
        levels = np.arange(32 * self.cum.size) / (32 * self.cum.size) * self.total
        self._guide = np.searchsorted(self.cum, levels, side="right").astype(np.int64)

    # ---- drawing ----------------------------------------------------------------------------------
    def _candidate_pass(self, u, v, x, loghat, status):
        """Classify candidates array by array, with the arithmetic of ``kernels.hat_slots`` term
        by term (``_slot_pass``, its numpy twin, and the pictures use it). status: 0 accepted
        at once, 1 undecided (u then holds log(squeeze / hat) at x, v the row's floor r),
        2 / 3 beyond the hat below / above. Returns the counts of statuses 0..3."""
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

    def _slot_pass(self, out, pending, ratio, floor, loghat, ends, end_side):
        """The numpy twin of ``kernels.hat_slots``: one candidate per slot of ``out``, in place,
        from the uniform the slot holds (see the kernel for what each list receives)."""
        n = out.size
        u = out.copy()
        v, x, lh, status = np.empty(n), np.empty(n), np.empty(n), np.empty(n, dtype=np.int8)
        self._candidate_pass(u, v, x, lh, status)
        on_hat = status <= 1
        out[on_hat] = x[on_hat]
        wait = np.flatnonzero(status == 1)
        beyond = np.flatnonzero(status >= 2)
        pending[:wait.size], ratio[:wait.size] = wait, u[wait]
        floor[:wait.size], loghat[:wait.size] = v[wait], lh[wait]
        ends[:beyond.size], end_side[:beyond.size] = beyond, status[beyond] - 2
        return np.array([n - wait.size - beyond.size, wait.size, beyond.size], dtype=np.int64)

    def _fill(self, out, rng):
        """Rejection run slot by slot: every slot of ``out`` takes candidates until one is
        accepted. Its first candidate comes from its own uniform, in one pass over all slots;
        the slots whose candidate was rejected (about 1 - 1/total of them) take their next
        candidates together, in a smaller pass, and so on. Each slot is thus an independent
        rejection draw, exact, and the draws stay in slot order."""
        slots = np.arange(0)
        target = out
        while target.size:
            rng.random(out=target)
            rejected = self._round(target, rng)
            if slots.size:
                out[slots] = target
                slots = slots[rejected]
            else:
                slots = rejected
            target = np.empty(slots.size)
        call = self._thread_state()
        if getattr(call, "reserve", None) is not None:
            call.remaining -= out.size

    def _round(self, out, rng):
        """One candidate for every slot of ``out`` (which holds the slots' uniforms): each
        costs that uniform; the few above their row's squeeze floor take a second for the
        height, then the squeeze, then the density. Returns the slots whose candidate was
        rejected (their value in ``out`` is to be replaced)."""
        n = out.size
        lists = self._scratch(n)
        if kernels.HAVE_JIT:
            counts = kernels.hat_slots(out, self.cum, self._guide, self.total, self._last, self._table, *lists)
        else:
            counts = self._slot_pass(out, *lists)
        pending, ratio, floor, loghat, ends, end_side = lists
        used = n
        beyond = int(counts[2])
        if beyond:
            slot, side = ends[:beyond].copy(), end_side[:beyond].copy()
            for code in (0, 1):
                chosen = slot[side == code]
                if chosen.size:
                    out[chosen], extra = self._end_draws(code, chosen.size, rng)
                    used += extra
        waiting = int(counts[1])
        slot, floor = pending[:waiting].copy(), floor[:waiting]
        # The height of an undecided candidate is uniform on [r h(x), h(x)].
        height = floor + rng.random(waiting) * (1.0 - floor)
        used += waiting
        with np.errstate(over="ignore", invalid="ignore"):
            squeezed = height <= np.exp(ratio[:waiting])
        test = ~squeezed
        with np.errstate(over="ignore", invalid="ignore"):
            ok = height[test] * np.exp(loghat[:waiting][test]) <= self.target.pdf(out[slot[test]])
        rejected = slot[test][~ok]
        c = self.counts
        c["uniforms"] += used
        c["candidates"] += n
        c["accepted"] += n - rejected.size
        c["squeezed"] += int(counts[0]) + int(np.count_nonzero(squeezed))
        c["density_evals"] += int(np.count_nonzero(test))
        return rejected

    def _end_draws(self, side, count, rng):
        """``count`` exact draws beyond the hat (side 0: below cL by quantile, 1: above cR by
        isf), and the uniforms spent. A model without a closed-form inverse pays a root
        search per call, so during one ``sample`` call draws for the whole call are made
        at once and kept in a reserve (iid, so using them later changes no law)."""
        mass = self.FL if side == 0 else self.SR
        invert = self.target.quantile if side == 0 else self.target.isf
        call = self._thread_state()
        reserve = getattr(call, "reserve", None)
        if reserve is None:
            return invert(rng.random(count) * mass), count
        spent = 0
        if reserve[side].size < count:
            expected = call.remaining * mass / self.total
            batch = count + int(1.2 * expected + 4.0 * math.sqrt(expected)) + 8
            reserve[side] = np.concatenate([reserve[side], invert(rng.random(batch) * mass)])
            spent = batch
        out, reserve[side] = reserve[side][:count], reserve[side][count:]
        return out, spent

    def sample(self, n=None, rng=None, out: np.ndarray | None = None) -> np.ndarray:
        # The reserve belongs to this call on this thread: threads sharing one sampler
        # must never hand out the same reserved draws twice.
        call = self._thread_state()
        call.reserve = [np.empty(0), np.empty(0)]
        call.remaining = check_output_buffer(out, n).size if out is not None else sample_size("n", n)
        try:
            return super().sample(n, rng, out=out)
        finally:
            call.reserve = None

    def _own_working_state(self):
        # A working copy starts with no scratch lists and no reserve of its own (Sampler.working_copy).
        self.__dict__.pop("_local", None)

    def _thread_state(self):
        """This thread's working state (scratch lists, the end draws' reserve)."""
        return self.__dict__.setdefault("_local", threading.local())

    def _scratch(self, n):
        """The lists a slot pass fills, reused across calls (fresh large arrays cost page
        faults every time); one set per thread, so a sampler shared by threads stays safe."""
        local = self._thread_state()
        lists = getattr(local, "lists", None)
        if lists is None or lists[0].size < n:
            size = max(n, 1 << 16)
            local.lists = lists = (np.empty(size, dtype=np.int64), np.empty(size), np.empty(size), np.empty(size),
                                   np.empty(size, dtype=np.int64), np.empty(size, dtype=np.int8))
        return tuple(b[:n] for b in lists)

