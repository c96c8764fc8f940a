"""Compiled inner loops for the hot paths, behind one small boundary.

Each kernel has a pure-numpy twin that is always correct; the compiled version
(Numba, ``cache=True``, ``nogil=True`` so threads scale) is used when Numba is
installed and ``LIFEDRAW_NO_JIT`` is not set. Tests run both and compare.
"""
from __future__ import annotations

import math
import os

import numpy as np

try:  # Numba is optional: the methods stay correct without it.
    if os.environ.get("LIFEDRAW_NO_JIT"):
        raise ImportError("disabled by LIFEDRAW_NO_JIT")
    import numba
    HAVE_JIT = True
except ImportError:  # pragma: no cover - exercised where numba is absent
    numba = None
    HAVE_JIT = False


def _jit(fn):
    if not HAVE_JIT:
        return None
    return numba.njit(cache=True, nogil=True, fastmath=False)(fn)


# ---- piecewise polynomial inverse CDF (numerical inversion) -----------------------------
#
# One packed row per piece, [x0, w*c_0, ..., w*c_k, 1/du], so a draw touches one
# short row: x = x0 + sum_j w c_j s^j with s = (u - u_start) / du.

def pack_pinv_table(x0, width, coef, du):
    """The packed rows used by ``pinv_eval`` (see above)."""
    with np.errstate(over="ignore", divide="ignore"):
        inv_du = np.where(du > 0, 1.0 / np.where(du > 0, du, 1.0), 0.0)
    # A piece of (sub)normal-tiny mass has no room for a position: s = 0 there.
    inv_du = np.where(np.isfinite(inv_du), inv_du, 0.0)
    return np.ascontiguousarray(np.column_stack([x0, coef * width[:, None], inv_du]))


def _guide_start(ui, guide, last):
    """The guide table's entry for u in [0, 1) (Chen & Asau 1974), clamped into 0..last.

    Every index is clamped into the tables, so even a damaged table cannot make the
    compiled loops read outside their memory (loading refuses such tables first)."""
    g_size = guide.shape[0]
    g = int(ui * g_size) if ui > 0.0 else 0
    if g >= g_size:
        g = g_size - 1
    k = guide[g]
    if k < 0:
        k = 0
    if k > last:
        k = last
    return k


if HAVE_JIT:
    _guide_start = numba.njit(inline="always", cache=True)(_guide_start)


def _pinv_piece(ui, guide, u_start, m):
    """The piece holding u: the guide table's entry, then rarely a step or two."""
    k = _guide_start(ui, guide, m - 1)
    while k < m - 1 and u_start[k + 1] <= ui:
        k += 1
    return k


def _pinv_eval_py(u, guide, u_start, table, out):
    n = u.shape[0]
    m = min(u_start.shape[0], table.shape[0])
    top = table.shape[1] - 2          # column of the highest coefficient
    if top == 6:
        # Degree 5 (the sampler's order) by Estrin's scheme: three independent pairs and
        # two squarings, a shorter dependency chain than Horner's five steps.
        for i in range(n):
            ui = u[i]
            k = _pinv_piece(ui, guide, u_start, m)
            s = min(max((ui - u_start[k]) * table[k, 7], 0.0), 1.0)
            s2 = s * s
            low = table[k, 1] + s * table[k, 2]
            mid = table[k, 3] + s * table[k, 4]
            high = table[k, 5] + s * table[k, 6]
            out[i] = table[k, 0] + (low + s2 * (mid + s2 * high))
        return out
    for i in range(n):
        ui = u[i]
        k = _pinv_piece(ui, guide, u_start, m)
        s = min(max((ui - u_start[k]) * table[k, top + 1], 0.0), 1.0)
        acc = table[k, top]
        for j in range(top - 1, 0, -1):
            acc = acc * s + table[k, j]
        out[i] = table[k, 0] + acc
    return out


if HAVE_JIT:
    # a*b + c may become one fused multiply-add (one rounding instead of two): the
    # polynomial differs from the numpy twin by an ulp or so, never more.
    _pinv_piece = numba.njit(inline="always", cache=True)(_pinv_piece)
    _pinv_eval_jit = numba.njit(cache=True, nogil=True, fastmath={"contract"})(_pinv_eval_py)
else:  # pragma: no cover - exercised where numba is absent
    _pinv_eval_jit = None


def pinv_eval(u, guide, u_start, table, out=None, *, use_jit=True):
    """x = F^-1_approx(u) for the packed tables of engine.methods.inversion.NumericalInversion."""
    u = np.ascontiguousarray(u, dtype=np.float64)
    if out is None:
        out = np.empty_like(u)
    if use_jit and _pinv_eval_jit is not None:
        return _pinv_eval_jit(u, guide, u_start, table, out)
    return _pinv_eval_numpy(u, guide, u_start, table, out)


# ---- the guide table of the inverse-CDF pieces (Chen & Asau 1974) ------------------------------
#
# guide[i] = the last piece whose start is <= i/size (clamped into 0..m-1), for non-decreasing starts:
# one merge of the levels i/size with the starts (size + m steps), where numpy's twin searches each level.

def _guide_table_py(u_start, size, guide):
    m = u_start.shape[0]
    k = -1
    for i in range(size):
        level = i / size
        while k + 1 < m and u_start[k + 1] <= level:
            k += 1
        guide[i] = min(max(k, 0), m - 1)
    return guide


_guide_table_jit = _jit(_guide_table_py)


def _guide_table_numpy(u_start, size, guide):
    levels = np.arange(size) / size
    guide[:] = np.clip(np.searchsorted(u_start, levels, side="right") - 1, 0, u_start.shape[0] - 1)
    return guide


def guide_table(u_start, size, *, use_jit=True):
    """The guide table over the non-decreasing piece starts ``u_start`` (see above), int64."""
    u_start = np.ascontiguousarray(u_start, dtype=np.float64)
    if u_start.ndim != 1 or u_start.size == 0 or int(size) < 1:
        raise ValueError("guide_table: a non-empty 1-d array of starts and a positive size")
    guide = np.empty(int(size), dtype=np.int64)
    if use_jit and _guide_table_jit is not None:
        return _guide_table_jit(u_start, int(size), guide)
    return _guide_table_numpy(u_start, int(size), guide)


def _pinv_eval_numpy(u, guide, u_start, table, out):
    g_size = guide.shape[0]
    m = min(u_start.shape[0], table.shape[0])
    top = table.shape[1] - 2
    with np.errstate(invalid="ignore"):
        g = np.clip(np.where(u > 0.0, u * g_size, 0.0), 0, g_size - 1).astype(np.int64)
    k = np.clip(guide[g].astype(np.int64), 0, m - 1)
    last = m - 1
    while True:
        step = (k < last) & (u_start[np.minimum(k + 1, last)] <= u)
        if not step.any():
            break
        k += step
    row = table[k]
    s = np.clip((u - u_start[k]) * row[:, top + 1], 0.0, 1.0)
    if top == 6:            # Estrin's scheme, as the compiled loop
        s2 = s * s
        acc = row[:, 5] + s * row[:, 6]
        acc *= s2
        acc += row[:, 3] + s * row[:, 4]
        acc *= s2
        acc += row[:, 1] + s * row[:, 2]
    else:
        acc = row[:, top].copy()
        for j in range(top - 1, 0, -1):
            acc *= s
            acc += row[:, j]
    np.add(row[:, 0], acc, out=out)
    return out


# ---- Leva's normal: classify ratio-of-uniforms candidates (Leva 1992) -------------------

def _leva_block_py(pairs, marks, out, start, s, t, a, b, r1, r2, span):
    """Leva's test on one block of candidates (u, v) = (1 - U1, span (U2 - 1/2)), read in
    pairs from ``pairs``; the accepted z = v/u go into out[start:] in order until it is full.

    Two passes. The first is branch-free arithmetic over the block (the compiler can keep
    several candidates in flight): marks[i] = 2 inside the inner ellipse, 1 between the
    ellipses, 0 outside the outer one. The second walks the marks in order, takes the
    logarithm only between the ellipses, and stores the accepted ratios. Testing and storing
    in one branchy pass was measured twice as slow: the accept/reject branch, taken one time
    in four at random, flushed the arithmetic of the candidates behind it.
    Every candidate of the block is classified, so the counts describe all the uniforms drawn.
    Returns (filled, accepted, squeezed, logs).
    """
    k = marks.shape[0]
    for i in range(k):
        ui = 1.0 - pairs[2 * i]
        vi = (pairs[2 * i + 1] - 0.5) * span
        x = ui - s
        y = abs(vi) - t
        q = x * x + y * (a * y - b * x)
        marks[i] = (q < r1) + (q <= r2)
    m = out.shape[0]
    j = start
    accepted = 0
    squeezed = 0
    logs = 0
    for i in range(k):
        mark = marks[i]
        if mark == 0:
            continue
        ui = 1.0 - pairs[2 * i]
        vi = (pairs[2 * i + 1] - 0.5) * span
        if mark == 2:
            squeezed += 1
        else:
            logs += 1
            # The exact boundary of A for exp(-z^2/2): v^2 <= -4 u^2 ln u.
            if not vi * vi <= -4.0 * ui * ui * np.log(ui):
                continue
        accepted += 1
        if j < m:
            out[j] = vi / ui
            j += 1
    return j - start, accepted, squeezed, logs


_leva_block_jit = _jit(_leva_block_py)


def leva_block(pairs, marks, out, start, constants):
    """Compiled test of one block of Leva candidates (None when no JIT is available);
    ``constants`` = (s, t, a, b, r1, r2, span), ``marks`` a uint8 scratch of len(pairs)/2."""
    if _leva_block_jit is None:
        return None
    return _leva_block_jit(pairs, marks, out, int(start), *constants)


# ---- ratio-of-uniforms on a polygon envelope (engine.methods.ratio_of_uniforms) ---------

def _rou_polygon_py(pick, s_uniform, r_uniform, alias_prob, alias, triangles, sector_of, chords, centre,
                    u_out, x_out, squeezed):
    """One pass over k candidates of the polygon envelope, term by term as RatioOfUniforms'
    numpy path: the triangle by Walker's alias method on ``pick``, the point (s, r) folded onto
    it, x = v/u + centre, and the squeeze test in the triangle's sector (a line test; sector -1
    is a tail wedge, outside the squeeze). ``triangles`` rows: apex u, apex v, e1 u, e1 v, e2 u,
    e2 v. Writes u, x and the squeeze verdict of each candidate."""
    n = alias.shape[0]
    last_chord = chords.shape[0] - 1
    for i in range(pick.shape[0]):
        p = pick[i] * n
        j = int(p)
        if j > n - 1:
            j = n - 1
        if not (p - j < alias_prob[j]):
            j = alias[j]
        s = s_uniform[i]
        r = r_uniform[i]
        if s + r > 1.0:
            s = 1.0 - s
            r = 1.0 - r
        u = triangles[j, 0] + s * triangles[j, 2] + r * triangles[j, 4]
        v = triangles[j, 1] + s * triangles[j, 3] + r * triangles[j, 5]
        x_out[i] = v / u + centre          # IEEE division (error_model="numpy"): u = 0 gives inf or nan
        u_out[i] = u
        k = sector_of[j]
        # u > 0 also keeps out a candidate rounded onto the u = 0 edge, whose v/u is no age.
        squeezed[i] = (0 <= k <= last_chord and u > 0.0
                       and chords[k, 0] * u + chords[k, 1] * v <= chords[k, 2])


_rou_polygon_jit = (numba.njit(cache=True, nogil=True, fastmath=False, error_model="numpy")(_rou_polygon_py)
                    if HAVE_JIT else None)


def rou_polygon(pick, s_uniform, r_uniform, alias_prob, alias, triangles, sector_of, chords, centre):
    """(u, x, squeezed) of ratio-of-uniforms candidates on a polygon envelope, compiled (None when
    no JIT is available; RatioOfUniforms then runs its numpy path, the twin)."""
    if _rou_polygon_jit is None:
        return None
    k = pick.shape[0]
    u, x, squeezed = np.empty(k), np.empty(k), np.empty(k, dtype=np.bool_)
    _rou_polygon_jit(pick, s_uniform, r_uniform, alias_prob, alias, triangles, sector_of, chords, float(centre),
                     u, x, squeezed)
    return u, x, squeezed


# ---- rejection from a piecewise-exponential hat (engine.methods.rejection) ---------------

def _hat_slots_py(out, cum, guide, total, last, table, pending, ratio, floor, loghat, ends, end_side, counts):
    """One candidate from the hat per output slot, in place: out[i] holds the slot's uniform
    on entry and its candidate x on exit (HatDrawing._slot_pass is the numpy twin, term by term).

    A candidate below its row's squeeze floor r is accepted at once (immediate acceptance).
    The others are listed for the caller, who draws their heights and tests them:
    pending[j] = slot, ratio[j] = log(squeeze / hat) at x (<= 0), floor[j] = r,
    loghat[j] = log h(x). Slots whose uniform fell in the inversion pieces beyond the hat
    are listed in ends (end_side 0 below, 1 above); their out[i] is left for the caller.
    counts = [accepted at once, pending, beyond the hat].
    """
    n = out.shape[0]
    top = min(cum.shape[0], table.shape[0]) - 1
    c0 = 0
    c1 = 0
    c2 = 0
    for i in range(n):
        ui = out[i]
        uA = ui * total
        # Guide table, then a short search: k = first with cum[k] > uA.
        k = _guide_start(ui, guide, top)
        while k < top and cum[k] <= uA:
            k += 1
        if k > last:
            k = last
        if k == 0 or k == top:
            ends[c2] = i
            end_side[c2] = 0 if k == 0 else 1
            c2 += 1
            continue
        w = (uA - table[k, 0]) * table[k, 1]
        w = min(max(w, 0.0), 1.0)
        r = table[k, 12]
        at_once = w < r
        if at_once:
            w = w * table[k, 13]
        else:
            w = (w - r) * table[k, 14]
        w = min(max(w, 0.0), 1.0)
        width = table[k, 2]
        if table[k, 5] > 0:
            d = w * width
        else:
            d = np.log1p(w * table[k, 3]) * table[k, 4]
        d = min(max(d, 0.0), width)
        xi = table[k, 6] + table[k, 7] * d
        out[i] = xi
        if at_once:
            c0 += 1
            continue
        lh = table[k, 8] + table[k, 9] * d
        pending[c1] = i
        ratio[c1] = min(table[k, 10] + table[k, 11] * (xi - table[k, 6]) - lh, 0.0)
        floor[c1] = r
        loghat[c1] = lh
        c1 += 1
    counts[0] = c0
    counts[1] = c1
    counts[2] = c2


_hat_slots_jit = _jit(_hat_slots_py)


def hat_slots(out, cum, guide, total, last, table, pending, ratio, floor, loghat, ends, end_side):
    """Compiled slot pass for rejection (see the loop above); returns [accepted at once,
    pending, beyond the hat]. The list arrays need room for out.size entries."""
    counts = np.zeros(3, dtype=np.int64)
    _hat_slots_jit(out, cum, guide, float(total), int(last), table, pending, ratio, floor, loghat, ends,
                   end_side, counts)
    return counts


# ---- one renewal round of a fleet (engine.fleet) ----------------------------------------------
#
# Every socket still inside the horizon moves its clock on by its new life (cut at its preventive
# age, if any), the event is counted in its run's period ((k - 1) p, k p] (as the renewal function
# counts), and the sockets still inside are packed to the front of ``clock`` and ``run``.

def _renewal_step_py(clock, life, limit, per_unit_limit, has_limit, run, has_run, horizon, inv_period,
                     n_periods, replacements, failures):
    k = 0
    for i in range(clock.shape[0]):
        step = life[i]
        failed = True
        if has_limit:
            cut = limit[i] if per_unit_limit else limit[0]
            if step > cut:
                step = cut
                failed = False
        c = clock[i] + step
        if c <= horizon:
            slot = int(math.ceil(c * inv_period)) - 1
            if slot < 0:
                slot = 0
            elif slot > n_periods - 1:
                slot = n_periods - 1
            if has_run:
                slot += run[i]
                run[k] = run[i]
            replacements[slot] += 1
            if failed:
                failures[slot] += 1
            clock[k] = c
            k += 1
    return k


_renewal_step_jit = _jit(_renewal_step_py)


def _renewal_step_numpy(clock, life, limit, per_unit_limit, has_limit, run, has_run, horizon, inv_period,
                        n_periods, replacements, failures):
    n = clock.shape[0]
    failed = np.ones(n, dtype=bool)
    step = life
    if has_limit:
        cut = limit if per_unit_limit else limit[0]
        failed = life <= cut
        step = np.minimum(life, cut)
    c = clock + step
    inside = c <= horizon
    c = c[inside]
    slot = np.clip(np.ceil(c * inv_period).astype(np.int64) - 1, 0, n_periods - 1)
    if has_run:
        kept = run[inside]
        slot += kept
        run[:c.size] = kept
    replacements += np.bincount(slot, minlength=replacements.size)
    failures += np.bincount(slot[failed[inside]], minlength=failures.size)
    clock[:c.size] = c
    return int(c.size)


def renewal_step(clock, life, limit, run, horizon, period, n_periods, replacements, failures, *, use_jit=True):
    """One round for the sockets in ``clock`` (their clocks) with new lives ``life``: counts into
    ``replacements``/``failures`` (int64, one per run x period), packs the sockets still inside the
    horizon to the front of ``clock`` (and ``run``, each socket's first bin; None for one run) and
    returns how many they are. ``limit``: None, a number, or one cut per socket."""
    has_limit = limit is not None
    limit_arr = np.ascontiguousarray(np.atleast_1d(np.asarray(limit if has_limit else 0.0, dtype=np.float64)))
    per_unit = has_limit and limit_arr.size == clock.shape[0] and np.ndim(limit) > 0
    has_run = run is not None
    run_arr = run if has_run else np.zeros(1, dtype=np.int64)
    args = (clock, life, limit_arr, per_unit, has_limit, run_arr, has_run, float(horizon), 1.0 / float(period),
            int(n_periods), replacements, failures)
    if use_jit and _renewal_step_jit is not None:
        return int(_renewal_step_jit(*args))
    return _renewal_step_numpy(*args)


# ---- one pass of a chunk's exact statistics with rank windows (engine.order_statistics) -------
#
# The sum of squared deviations from a given mean, the draws beyond each mission time, and for
# each value window [lo, hi] (sorted, disjoint) the draws below it and the draws inside it,
# whose values are copied, in order, into ``kept`` while it has room. Non-finite draws are
# counted as bad (the caller refuses the sample then, so what they add elsewhere is moot).
# Several short loops, not one: each count loop compiles to vector code, and the copying
# loop's branch is taken by the few draws inside a window only (measured 2x faster than one
# fused loop over 10^7 draws).

def _window_pass_py(x, mean, times, lo, hi, survivors, below, inside, kept):
    n = x.shape[0]
    # Four partial sums: no reordering by the compiler is needed to keep the pipeline busy.
    s0 = 0.0
    s1 = 0.0
    s2 = 0.0
    s3 = 0.0
    bad = 0
    whole = n - n % 4
    for i in range(0, whole, 4):
        d0 = x[i] - mean
        d1 = x[i + 1] - mean
        d2 = x[i + 2] - mean
        d3 = x[i + 3] - mean
        s0 += d0 * d0
        s1 += d1 * d1
        s2 += d2 * d2
        s3 += d3 * d3
    for i in range(whole, n):
        d0 = x[i] - mean
        s0 += d0 * d0
    for i in range(n):
        bad += not (abs(x[i]) < math.inf)
    for j in range(times.shape[0]):
        t = times[j]
        c = 0
        for i in range(n):
            c += x[i] > t
        survivors[j] += c
    n_windows = lo.shape[0]
    for w in range(n_windows):
        edge = lo[w]
        c = 0
        for i in range(n):
            c += x[i] < edge
        below[w] += c
    room = kept.shape[0]
    k = 0
    for i in range(n):
        v = x[i]
        hit = False
        for w in range(n_windows):
            hit |= (v >= lo[w]) & (v <= hi[w])
        if hit:
            for w in range(n_windows):
                inside[w] += (v >= lo[w]) & (v <= hi[w])
            if k < room:
                kept[k] = v
            k += 1
    return (s0 + s1) + (s2 + s3), bad, k


_window_pass_jit = _jit(_window_pass_py)


def _window_pass_numpy(x, mean, times, lo, hi, survivors, below, inside, kept):
    bad = int(x.size - np.count_nonzero(np.isfinite(x)))
    d = x - mean
    m2 = float(np.dot(d, d))
    del d
    for j, t in enumerate(times):
        survivors[j] += np.count_nonzero(x > t)
    chosen = np.zeros(x.size, dtype=bool)
    for w in range(lo.shape[0]):
        below[w] += np.count_nonzero(x < lo[w])
        mask = (x >= lo[w]) & (x <= hi[w])
        inside[w] += np.count_nonzero(mask)
        chosen |= mask
    values = x[chosen]
    room = min(values.size, kept.shape[0])
    kept[:room] = values[:room]
    return m2, bad, int(values.size)


def window_pass(x, mean, times, lo, hi, room, *, use_jit=True):
    """One chunk ``x``: (m2, bad, survivors, below, inside, kept, in_windows).

    m2 = sum of (x - mean)^2; bad = the non-finite draws; survivors[j] = draws > times[j];
    below[w], inside[w] = draws < lo[w] and in [lo[w], hi[w]] (windows sorted, disjoint);
    kept = the in-window values in the chunk's order, at most ``room`` of them, and
    in_windows = how many there were (more than ``room`` means some were not kept)."""
    x = np.ascontiguousarray(x, dtype=np.float64).ravel()
    times = np.ascontiguousarray(times, dtype=np.float64)
    lo = np.ascontiguousarray(lo, dtype=np.float64)
    hi = np.ascontiguousarray(hi, dtype=np.float64)
    survivors = np.zeros(times.size, dtype=np.int64)
    below = np.zeros(lo.size, dtype=np.int64)
    inside = np.zeros(lo.size, dtype=np.int64)
    kept = np.empty(max(int(room), 0), dtype=np.float64)
    fn = _window_pass_jit if use_jit and _window_pass_jit is not None else _window_pass_numpy
    m2, bad, in_windows = fn(x, float(mean), times, lo, hi, survivors, below, inside, kept)
    return float(m2), int(bad), survivors, below, inside, kept[:min(int(in_windows), kept.size)], int(in_windows)


# ---- Chebyshev sums of a piecewise integral (engine/piece_series.py) -----------------------
#
# For each point y: its piece k (binary search in edges), x = its place in the piece on [-1, 1],
# the piece's series sum_m table[k, w, m] T_m(x) by Clenshaw's recurrence (ATAP ch. 3), plus
# base[w, k], where w = which[i] is the point's side (0: the mass below y, 1: above); trusted where
# the result is at least limit[k] (below it the rounding of the sum is too large beside the value:
# the caller integrates those points itself).

def _chebyshev_piece_sums_py(y, edges, table, which, base, limit, out, trusted):
    n = y.shape[0]
    m = min(table.shape[0], edges.shape[0] - 1, base.shape[1], limit.shape[0])
    top = table.shape[2] - 1
    piece = np.empty(n, dtype=np.int64)
    place = np.empty(n)
    k = -1
    for i in range(n):
        yi = y[i]
        # Neighbouring points mostly share a piece: the previous point's piece is tried first
        # (the same answer as the search: edges[k] <= yi < edges[k + 1], or the last piece's end).
        if not (k >= 0 and edges[k] <= yi and (yi < edges[k + 1] or (k == m - 1 and yi >= edges[m]))):
            k = np.searchsorted(edges[:m + 1], yi, side="right") - 1
            k = min(max(k, 0), m - 1)
        a = edges[k]
        b = edges[k + 1]
        piece[i] = k
        # A piece of zero width (edges that rounded together) has no inside: its middle, x = 0.
        place[i] = min(max((2.0 * yi - a - b) / (b - a), -1.0), 1.0) if b > a else 0.0
    # Four points at a time: four independent recurrences keep the pipeline full
    # (one recurrence alone waits on its own previous step).
    quads = n - n % 4
    for i in range(0, quads, 4):
        p0, p1, p2, p3 = piece[i], piece[i + 1], piece[i + 2], piece[i + 3]
        w0, w1, w2, w3 = which[i], which[i + 1], which[i + 2], which[i + 3]
        x0, x1, x2, x3 = place[i], place[i + 1], place[i + 2], place[i + 3]
        a0 = a1 = a2 = a3 = 0.0
        c0 = c1 = c2 = c3 = 0.0
        for j in range(top, 0, -1):
            a0, c0 = table[p0, w0, j] + 2.0 * x0 * a0 - c0, a0
            a1, c1 = table[p1, w1, j] + 2.0 * x1 * a1 - c1, a1
            a2, c2 = table[p2, w2, j] + 2.0 * x2 * a2 - c2, a2
            a3, c3 = table[p3, w3, j] + 2.0 * x3 * a3 - c3, a3
        out[i] = base[w0, p0] + (table[p0, w0, 0] + x0 * a0 - c0)
        out[i + 1] = base[w1, p1] + (table[p1, w1, 0] + x1 * a1 - c1)
        out[i + 2] = base[w2, p2] + (table[p2, w2, 0] + x2 * a2 - c2)
        out[i + 3] = base[w3, p3] + (table[p3, w3, 0] + x3 * a3 - c3)
    for i in range(quads, n):
        p = piece[i]
        w = which[i]
        x = place[i]
        b1 = 0.0
        b2 = 0.0
        for j in range(top, 0, -1):
            b1, b2 = table[p, w, j] + 2.0 * x * b1 - b2, b1
        out[i] = base[w, p] + (table[p, w, 0] + x * b1 - b2)
    for i in range(n):
        trusted[i] = abs(out[i]) >= limit[piece[i]]
    return out


_chebyshev_piece_sums_jit = _jit(_chebyshev_piece_sums_py)


def _chebyshev_piece_sums_numpy(y, edges, table, which, base, limit, out, trusted):
    m = min(table.shape[0], edges.shape[0] - 1, base.shape[1], limit.shape[0])
    k = np.minimum(np.maximum(np.searchsorted(edges[:m + 1], y, side="right") - 1, 0), m - 1)
    a, b = edges[k], edges[k + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.where(b > a, np.minimum(np.maximum((2.0 * y - a - b) / (b - a), -1.0), 1.0), 0.0)
    rows = table[k, which]
    b1 = np.zeros_like(y)
    b2 = np.zeros_like(y)
    for j in range(table.shape[2] - 1, 0, -1):
        b1, b2 = rows[:, j] + 2.0 * x * b1 - b2, b1
    np.add(base[which, k], rows[:, 0] + x * b1 - b2, out=out)
    np.greater_equal(np.abs(out), limit[k], out=trusted)
    return out


def chebyshev_piece_sums(y, edges, table, which, base, limit, *, use_jit=True):
    """(values, trusted) for the points y of a piecewise Chebyshev table; see above. ``which`` is one
    side for all points (0 or 1, ``base`` then that side's masses, one per piece) or one side per point
    (an array, ``base`` then both sides' masses, 2 x pieces)."""
    y = np.ascontiguousarray(np.ravel(y), dtype=np.float64)
    out = np.empty_like(y)
    trusted = np.empty(y.shape, dtype=np.bool_)
    base = np.asarray(base, dtype=np.float64)
    if np.ndim(which) == 0:
        which = np.full(y.shape, 1 if which else 0, dtype=np.int64)
        base = np.stack([base, base]) if base.ndim == 1 else base
    elif np.asarray(which).dtype == np.bool_:
        which = np.ascontiguousarray(np.ravel(which)).view(np.int8)   # 0 or 1 by construction, no copy
    else:
        which = (np.ravel(which) != 0).astype(np.int64)     # 0 or 1 only: the kernel indexes with it
        if which.shape != y.shape:
            raise ValueError("chebyshev_piece_sums: one side per point")
    if base.ndim != 2 or base.shape[0] != 2:
        raise ValueError("chebyshev_piece_sums: base must hold the masses below and above each piece")
    args = (y, np.ascontiguousarray(edges, dtype=np.float64), np.ascontiguousarray(table, dtype=np.float64),
            which, np.ascontiguousarray(base), np.ascontiguousarray(limit, dtype=np.float64),
            out, trusted)
    if use_jit and _chebyshev_piece_sums_jit is not None:
        _chebyshev_piece_sums_jit(*args)
    else:
        _chebyshev_piece_sums_numpy(*args)
    return out, trusted


# ---- interpolating polynomials of the inverse-CDF pieces (engine/methods/inversion.py) ---------
#
# Row by row: Newton's divided differences of (s[i, j], values[j]), then the Newton form multiplied
# out into monomial coefficients (Stoer & Bulirsch, Introduction to Numerical Analysis, 3rd ed., 2.1.3).

def _interpolating_coefficients_py(s, values, out):
    n, m = s.shape
    d = np.empty(m)
    c = np.empty(m)
    for i in range(n):
        for j in range(m):
            d[j] = values[j]
        for j in range(1, m):
            for r in range(m - 1, j - 1, -1):
                d[r] = (d[r] - d[r - 1]) / (s[i, r] - s[i, r - j])
        for j in range(m):
            c[j] = 0.0
        c[0] = d[m - 1]
        for j in range(m - 2, -1, -1):
            # c(s) <- c(s) * (s - s_j) + d_j
            for r in range(m - 1, 0, -1):
                c[r] = c[r - 1] - s[i, j] * c[r]
            c[0] = d[j] - s[i, j] * c[0]
        for j in range(m):
            out[i, j] = c[j]
    return out


_interpolating_coefficients_jit = _jit(_interpolating_coefficients_py)


def _interpolating_coefficients_numpy(s, values, out):
    n, m = s.shape
    d = np.broadcast_to(values, (n, m)).copy()
    for j in range(1, m):
        d[:, j:] = (d[:, j:] - d[:, j - 1:-1]) / (s[:, j:] - s[:, :-j])
    c = np.zeros((n, m))
    c[:, 0] = d[:, m - 1]
    for j in range(m - 2, -1, -1):
        shifted = np.zeros((n, m))
        shifted[:, 1:] = c[:, :-1]
        c = shifted - s[:, j:j + 1] * c
        c[:, 0] += d[:, j]
    out[:] = c
    return out


def interpolating_coefficients(s, values, *, use_jit=True):
    """Monomial coefficients of the polynomial through (s[i, j], values[j]) for every row i
    (rows of strictly increasing s; see above)."""
    s = np.ascontiguousarray(s, dtype=np.float64)
    values = np.ascontiguousarray(values, dtype=np.float64)
    out = np.empty(s.shape)
    if use_jit and _interpolating_coefficients_jit is not None:
        return _interpolating_coefficients_jit(s, values, out)
    return _interpolating_coefficients_numpy(s, values, out)


# ---- one fitting round of the inverse-CDF pieces (engine/methods/inversion.py) -------------
#
# Row by row, from the u-increments du[i, j] = F(x_ij) - F(x0_i) at the nodes x_ij = x0_i + w_i NODES_S[j]:
# the polynomial x(s) through (du/du_last, NODES_S) (Newton's divided differences, as above), the ages
# where it puts the test points s = test_s[j] (Horner's rule), and the row's status: FITTED, LINEAR (the
# piece holds at most ``negligible`` of the mass: x = x0 + w s), NODES_NOT_INCREASING (F did not rise
# from node to node) or NOT_MONOTONE (the polynomial turns back between x0 and x0 + w). Then, with
# the u-increments at the test ages, each row's u-error: max_j |du_test - du_last test_s[j]| (DHL 2010).

FITTED, LINEAR, NODES_NOT_INCREASING, NOT_MONOTONE = 0, 1, 2, 3


def _inverse_pieces_py(x0, w, du, nodes, test_s, negligible, coef, x_test, status):
    n, m = du.shape
    t = test_s.shape[0]
    s = np.empty(m)
    d = np.empty(m)
    c = np.empty(m)
    for i in range(n):
        total = du[i, m - 1]
        scale = total if total > 0 else 1.0
        for j in range(m):
            s[j] = du[i, j] / scale
        increasing = True
        for j in range(1, m):
            if not s[j] - s[j - 1] > 0:
                increasing = False
        for j in range(m):
            c[j] = 0.0
        c[1] = 1.0
        if total <= negligible:
            status[i] = LINEAR
        elif not increasing:
            status[i] = NODES_NOT_INCREASING
        else:
            status[i] = FITTED
            for j in range(m):
                d[j] = nodes[j]
            for j in range(1, m):
                for r in range(m - 1, j - 1, -1):
                    d[r] = (d[r] - d[r - 1]) / (s[r] - s[r - j])
            for j in range(m):
                c[j] = 0.0
            c[0] = d[m - 1]
            for j in range(m - 2, -1, -1):
                for r in range(m - 1, 0, -1):
                    c[r] = c[r - 1] - s[j] * c[r]
                c[0] = d[j] - s[j] * c[0]
        for j in range(m):
            coef[i, j] = c[j]
        last = x0[i]
        monotone = True
        for j in range(t):
            h = c[m - 1]
            for r in range(m - 2, -1, -1):
                h = h * test_s[j] + c[r]
            x = x0[i] + w[i] * h
            x_test[i, j] = x
            if not x - last >= 0:
                monotone = False
            last = x
        if not (x0[i] + w[i]) - last >= 0:
            monotone = False
        if status[i] == FITTED and not monotone:
            status[i] = NOT_MONOTONE
    return coef


_inverse_pieces_jit = _jit(_inverse_pieces_py)


def _inverse_pieces_numpy(x0, w, du, nodes, test_s, negligible, coef, x_test, status):
    n, m = du.shape
    total = du[:, -1]
    linear = total <= negligible
    s = du / np.where(total > 0, total, 1.0)[:, None]
    increasing = np.all(np.diff(s, axis=1) > 0, axis=1)
    fitted = increasing & ~linear
    coef[:] = 0.0
    coef[:, 1] = 1.0
    if np.any(fitted):
        coef[fitted] = _interpolating_coefficients_numpy(s[fitted], nodes, np.empty((int(fitted.sum()), m)))
    h = coef[:, None, m - 1] * np.ones(test_s.shape)
    for r in range(m - 2, -1, -1):
        h = h * test_s[None, :] + coef[:, None, r]
    x_test[:] = x0[:, None] + w[:, None] * h
    ends = np.concatenate([x0[:, None], x_test, (x0 + w)[:, None]], axis=1)
    monotone = np.all(np.diff(ends, axis=1) >= 0, axis=1)
    status[:] = np.where(linear, LINEAR, np.where(~increasing, NODES_NOT_INCREASING,
                                                  np.where(monotone, FITTED, NOT_MONOTONE)))
    return coef


def inverse_pieces(x0, w, du, nodes, test_s, negligible, *, use_jit=True):
    """(coef, x_test, status) for pieces [x0, x0 + w] with u-increments du at their nodes; see above."""
    x0 = np.ascontiguousarray(x0, dtype=np.float64)
    w = np.ascontiguousarray(w, dtype=np.float64)
    du = np.ascontiguousarray(du, dtype=np.float64)
    nodes = np.ascontiguousarray(nodes, dtype=np.float64)
    test_s = np.ascontiguousarray(test_s, dtype=np.float64)
    if du.ndim != 2 or du.shape != (x0.size, nodes.size) or w.shape != x0.shape or nodes.size < 2:
        raise ValueError("inverse_pieces: du must hold one row of node increments per piece")
    coef = np.empty(du.shape)
    x_test = np.empty((x0.size, test_s.size))
    status = np.empty(x0.size, dtype=np.int64)
    args = (x0, w, du, nodes, test_s, float(negligible), coef, x_test, status)
    if use_jit and _inverse_pieces_jit is not None:
        _inverse_pieces_jit(*args)
    else:
        _inverse_pieces_numpy(*args)
    return coef, x_test, status


def _inverse_piece_errors_py(du_test, total, test_s, status, err):
    n, t = du_test.shape
    for i in range(n):
        if status[i] == LINEAR:
            err[i] = total[i]
        elif status[i] != FITTED:
            err[i] = np.inf
        else:
            worst = 0.0
            for j in range(t):
                e = abs(du_test[i, j] - total[i] * test_s[j])
                if e > worst or e != e:
                    worst = e
                    if e != e:
                        break
            err[i] = worst
    return err


_inverse_piece_errors_jit = _jit(_inverse_piece_errors_py)


def _inverse_piece_errors_numpy(du_test, total, test_s, status, err):
    worst = np.max(np.abs(du_test - total[:, None] * test_s[None, :]), axis=1)
    err[:] = np.where(status == LINEAR, total, np.where(status == FITTED, worst, np.inf))
    return err


def inverse_piece_errors(du_test, total, test_s, status, *, use_jit=True):
    """Each piece's u-error from the u-increments at its test points (see above)."""
    du_test = np.ascontiguousarray(du_test, dtype=np.float64)
    total = np.ascontiguousarray(total, dtype=np.float64)
    test_s = np.ascontiguousarray(test_s, dtype=np.float64)
    status = np.ascontiguousarray(status, dtype=np.int64)
    if du_test.shape != (total.size, test_s.size) or status.shape != total.shape:
        raise ValueError("inverse_piece_errors: one row of test increments per piece")
    err = np.empty(total.shape)
    if use_jit and _inverse_piece_errors_jit is not None:
        return _inverse_piece_errors_jit(du_test, total, test_s, status, err)
    return _inverse_piece_errors_numpy(du_test, total, test_s, status, err)

