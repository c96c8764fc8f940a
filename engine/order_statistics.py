"""Exact order statistics and moments of a sample too large for memory, read chunk by chunk.

One pass when the sample's size is known: the wanted ranks follow from it, the first chunks
(one per worker, held in memory) place a value window around each (rank_windows.py), and the
pass sums moments and survivor counts, counts the draws below each window and keeps those
inside it; the counts say which kept draw has each rank. A rank outside its window (the first
chunks misled) is found by the fallback, a radix select (distribution counting on the bits of
the numbers: Knuth, TAOCP vol. 3, 5.2.5): a histogram of each draw's top 20 bits in an
order-preserving integer form places the rank in one bin, and a further pass keeps only the
draws of those bins. Moments are merged across chunks by Chan, Golub & LeVeque (1983),
"Algorithms for computing the sample variance", The American Statistician 37(3).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
import numpy as np

from . import kernels
from .errors import ModelError
from .rank_windows import Windows, plan_windows

SIGN = np.uint64(1 << 63)
TOP_SHIFT = 44                 # pass 1 bins on the top 64 - 44 = 20 bits (sign, exponent, 8 mantissa bits)
REFINE_BITS = 16               # each extra pass (rarely needed) splits a bin on 16 more bits
KEEP_LIMIT = 1 << 22           # radix select: draws held in memory at most (32 MB) before a bin is split
WINDOW_KEEP_LIMIT = 1 << 23    # rank windows: draws kept at most (64 MB); windows expected to hold more
                               # than half of it are not used (the radix select runs instead)


@dataclass
class SampleStats:
    """What one pass gives exactly: size, mean, sd (n - 1) and survivors beyond each time."""

    n: int
    mean: float
    sd: float
    survivors: np.ndarray


def order_keys(x: np.ndarray) -> np.ndarray:
    """uint64 keys whose order is the order of the float64 values (IEEE 754 bit patterns
    with the sign bit set for positives and all bits flipped for negatives)."""
    u = np.ascontiguousarray(x, dtype=np.float64).view(np.uint64)
    # flip = SIGN for a positive value, all ones for a negative one; one array, updated in place.
    flip = u >> np.uint64(63)
    np.multiply(flip, np.uint64(0x7FFFFFFFFFFFFFFF), out=flip)
    flip |= SIGN
    flip ^= u
    return flip


def key_values(keys: np.ndarray) -> np.ndarray:
    """The float64 values whose order keys are ``keys`` (inverse of ``order_keys``)."""
    k = np.asarray(keys, dtype=np.uint64)
    u = np.where(k & SIGN, k ^ SIGN, ~k)
    return u.view(np.float64)


def key_value(key: int) -> float:
    return float(key_values(np.array([key], dtype=np.uint64))[0])


def top_bin_counts(x: np.ndarray) -> np.ndarray:
    """Counts of the draws by the top 20 bits of their order keys, without forming the keys:
    the top bits of the raw pattern, u >> 44, are a key bin after reversing the negatives."""
    u = np.ascontiguousarray(x, dtype=np.float64).view(np.uint64)
    raw = np.bincount((u >> np.uint64(TOP_SHIFT)).view(np.int64), minlength=1 << (64 - TOP_SHIFT))
    half = raw.size // 2
    # Positives keep their order above the negatives; negatives' keys run backwards (all bits flipped).
    return np.concatenate([raw[half:][::-1], raw[:half]]).astype(np.int64)


# ---- in memory --------------------------------------------------------------------------------

def in_memory_pass(xs: np.ndarray, times: np.ndarray, ranks_of):
    """Statistics of a finite 1-D array in memory, and the values of the 0-based ranks
    ``ranks_of(n)`` by ``np.partition`` (introselect)."""
    n = xs.size
    survivors = np.array([np.count_nonzero(xs > t) for t in times], dtype=np.int64)
    stats = SampleStats(n, float(np.mean(xs)), float(np.std(xs, ddof=1)) if n > 1 else math.nan, survivors)
    ranks = sorted(set(ranks_of(n)))
    values = {}
    if ranks:
        part = np.partition(xs, ranks)
        values = {k: float(part[k]) for k in ranks}
    computation = {"method": "exact order statistics", "passes": 1, "chunks": 1, "kept": n,
                   "text": f"exact order statistics of the {n:,} draws, in memory"}
    return stats, values, computation


# ---- chunk by chunk ---------------------------------------------------------------------------

def parallel_slots() -> int:
    """How many chunks the current Dask scheduler works on at once."""
    from .generate import cluster_threads, local_threads
    try:
        from distributed import default_client
        client = default_client()
    except (ImportError, ValueError):       # no distributed, or no client: local threads
        return local_threads()
    return cluster_threads(client)


def chunked_pass(x, times: np.ndarray, ranks_of):
    """Statistics of a 1-D dask array and the values of its 0-based ranks ``ranks_of(n)``,
    exact, holding at most one chunk per worker (two while the first chunks are held) plus
    at most WINDOW_KEEP_LIMIT kept draws (KEEP_LIMIT in the radix select). Returns
    (stats, values by rank, computation).

    With the size known in advance: one pass with rank windows, plus two (a histogram pass
    and a keeping pass) only for ranks that fell outside their windows. With unknown chunk
    sizes, or first chunks that disagree or would need too wide windows: the radix select's
    two passes (a third when the bins holding the ranks are too full to keep).
    """
    import dask

    if x.ndim != 1:
        raise ModelError("samples", f"must be a 1-D array, got {x.ndim} dimensions")
    blocks = list(x.to_delayed().ravel())
    if not math.isfinite(x.shape[0]):       # sizes unknown: the ranks are known after a first pass
        return _radix_passes(blocks, times, ranks_of)
    n, sizes = int(x.shape[0]), [int(s) for s in x.chunks[0]]
    if n == 0:
        raise ModelError("samples", "must not be empty")
    ranks = sorted(set(ranks_of(n)))
    pilots = min(parallel_slots(), len(blocks))
    plan = plan_windows(ranks, n, sizes[:pilots])
    if min(sizes[:pilots]) == 0 or plan.expected_kept() > WINDOW_KEEP_LIMIT / 2:
        return _radix_passes(blocks, times, ranks_of)
    # The first chunks are read once and held: the pilot looks at them, and the pass uses them.
    held = list(dask.persist(*blocks[:pilots]))
    windows = Windows.none()
    if ranks:
        picked = dask.compute(*[dask.delayed(pilot_values)(b, plan.positions(m)) for b, m in zip(held, sizes)])
        windows = plan.windows(picked)
    if windows is None:
        del held                              # read again rather than held through two passes
        return _radix_passes(blocks, times, ranks_of)

    share = plan.expected_kept() / n

    def summaries(parts, part_sizes):
        # Room for four times a chunk's expected share of the kept draws and then some (a
        # chunk's count is about Poisson); the merges hold the total to WINDOW_KEEP_LIMIT.
        tasks = [dask.delayed(_window_summary)(b, times, windows.lo, windows.hi,
                                               min(m, WINDOW_KEEP_LIMIT, math.ceil(4 * share * m) + 1024))
                 for b, m in zip(parts, part_sizes)]
        return dask.compute(_tree(dask.delayed, tasks, _merge_windowed))[0] if tasks else None

    total = summaries(held, sizes[:pilots])
    del held                                  # the held chunks go before the rest are drawn
    rest = summaries(blocks[pilots:], sizes[pilots:])
    total = total if rest is None else _merge_windowed(total, rest)
    stats = _stats_of(total)
    computation = {"method": "exact order statistics", "passes": 1, "chunks": len(blocks),
                   "kept": int(total.kept.size), "windows": int(windows.lo.size), "pilot_chunks": pilots}
    if total.overflow:
        found, missed = {}, ranks
    else:
        found, missed = windows.locate(ranks, total.below, total.inside)
    values = {}
    if found:
        part = np.partition(total.kept, sorted(set(found.values())))
        values = {k: float(part[i]) for k, i in found.items()}
    text = (f"exact order statistics of the {n:,} draws in 1 pass over {len(blocks):,} chunks, keeping "
            f"{computation['kept']:,} draws inside {windows.lo.size} value windows set from the first "
            f"{pilots} chunks")
    if missed:
        hist = dask.compute(_tree(dask.delayed, [dask.delayed(top_bin_counts)(b) for b in blocks], np.add))[0]
        computation["passes"] += 1
        computation["fallback_ranks"] = len(missed)
        values.update(_radix_select(blocks, hist, missed, computation))
        text += (f"; {len(missed)} wanted ranks lay outside their windows and were found by a radix select "
                 f"({computation['passes'] - 1} more passes)")
    computation["text"] = text
    return stats, values, computation


def pilot_values(block, positions: np.ndarray) -> np.ndarray:
    """The values of a chunk at 0-based ranks ``positions`` (-inf below 0, +inf at or past its size)."""
    x = np.asarray(block, dtype=np.float64).ravel()
    # A full sort: numpy's vectorised sort measured 2x faster than np.partition at a dozen ranks.
    ordered = np.sort(x) if x.size else np.zeros(1)
    picked = ordered[np.clip(positions, 0, max(x.size - 1, 0))]
    return np.where(positions < 0, -math.inf, np.where(positions >= x.size, math.inf, picked))


@dataclass
class _Windowed:
    n: int
    mean: float
    m2: float
    bad: int
    survivors: np.ndarray
    below: np.ndarray
    inside: np.ndarray
    kept: np.ndarray
    overflow: bool


def _window_summary(block, times, lo, hi, room) -> _Windowed:
    x = np.asarray(block, dtype=np.float64).ravel()
    with np.errstate(invalid="ignore", over="ignore"):   # non-finite draws are counted, then refused
        mean = float(np.mean(x)) if x.size else 0.0
        m2, bad, survivors, below, inside, kept, in_windows = kernels.window_pass(x, mean, times, lo, hi, room)
    overflow = in_windows > room
    # A chunk with more in-window draws than its room keeps none: the windows missed the bulk
    # of the sample there, and the fallback finds the ranks instead.
    return _Windowed(x.size, mean, m2, bad, survivors, below, inside, kept[:0] if overflow else kept, overflow)


def _merge_windowed(a: _Windowed, b: _Windowed) -> _Windowed:
    n, mean, m2 = _chan(a.n, a.mean, a.m2, b.n, b.mean, b.m2)
    overflow = a.overflow or b.overflow or a.kept.size + b.kept.size > WINDOW_KEEP_LIMIT
    kept = a.kept[:0] if overflow else np.concatenate([a.kept, b.kept])
    return _Windowed(n, mean, m2, a.bad + b.bad, a.survivors + b.survivors, a.below + b.below,
                     a.inside + b.inside, kept, overflow)


def _chan(na, mean_a, m2_a, nb, mean_b, m2_b):
    """Chan, Golub & LeVeque (1983): pooled size, mean and sum of squared deviations."""
    n = na + nb
    if na == 0 or nb == 0:
        mean, m2 = (mean_a, m2_a) if nb == 0 else (mean_b, m2_b)
    else:
        delta = mean_b - mean_a
        mean = mean_a + delta * nb / n
        m2 = m2_a + m2_b + delta * delta * na * nb / n
    return n, mean, m2


def _stats_of(total) -> SampleStats:
    if total.n == 0:
        raise ModelError("samples", "must not be empty")
    if total.bad:
        raise ModelError("samples", f"must be finite; {total.bad} are NaN or infinite")
    n = int(total.n)
    sd = math.sqrt(total.m2 / (n - 1)) if n > 1 else math.nan
    return SampleStats(n, float(total.mean), sd, total.survivors)


# ---- the radix select: a histogram pass, then a keeping pass ------------------------------------

@dataclass
class _Summary:
    n: int
    mean: float
    m2: float
    bad: int
    survivors: np.ndarray
    hist: np.ndarray


def _summarise(block, times) -> _Summary:
    x = np.asarray(block, dtype=np.float64).ravel()
    n = x.size
    bad = int(n - np.count_nonzero(np.isfinite(x)))
    hist = np.zeros(1 << (64 - TOP_SHIFT), dtype=np.int64)
    survivors = np.zeros(len(times), dtype=np.int64)
    if n == 0 or bad:
        return _Summary(n, 0.0, 0.0, bad, survivors, hist)
    mean = float(np.mean(x))
    deviations = x - mean
    m2 = float(np.dot(deviations, deviations))
    del deviations
    survivors = np.array([np.count_nonzero(x > t) for t in times], dtype=np.int64)
    return _Summary(n, mean, m2, 0, survivors, top_bin_counts(x))


def _merge(a: _Summary, b: _Summary) -> _Summary:
    n, mean, m2 = _chan(a.n, a.mean, a.m2, b.n, b.mean, b.m2)
    return _Summary(n, mean, m2, a.bad + b.bad, a.survivors + b.survivors, a.hist + b.hist)


def _keep(block, groups) -> np.ndarray:
    """The order keys of a block's draws whose key prefix (key >> shift) is one of ``groups``."""
    keys = order_keys(np.asarray(block, dtype=np.float64).ravel())
    prefixes = keys >> np.uint64(groups[0][1])          # every group of one pass has one shift
    mask = np.zeros(keys.size, dtype=bool)
    for prefix, _ in groups:
        mask |= prefixes == np.uint64(prefix)
    return keys[mask]


def _split_counts(block, groups, bits: int) -> np.ndarray:
    """For each group (prefix, shift): counts of its draws by the next ``bits`` bits."""
    keys = order_keys(np.asarray(block, dtype=np.float64).ravel())
    out = np.zeros((len(groups), 1 << bits), dtype=np.int64)
    for g, (prefix, shift) in enumerate(groups):
        sel = keys[(keys >> np.uint64(shift)) == np.uint64(prefix)]
        sub = (sel >> np.uint64(shift - bits)) & np.uint64((1 << bits) - 1)
        out[g] = np.bincount(sub.astype(np.int64), minlength=1 << bits)
    return out


def _tree(delayed, parts, combine):
    """Pairwise reduction of delayed parts (depth log2 of the number of chunks)."""
    parts = list(parts)
    while len(parts) > 1:
        parts = [delayed(combine)(parts[i], parts[i + 1]) if i + 1 < len(parts) else parts[i]
                 for i in range(0, len(parts), 2)]
    return parts[0]


def _radix_passes(blocks, times, ranks_of):
    """Pass 1: moments, survivors and the top-bits histogram; then the radix select."""
    import dask

    delayed = dask.delayed
    (total,) = dask.compute(_tree(delayed, [delayed(_summarise)(b, times) for b in blocks], _merge))
    stats = _stats_of(total)
    n = stats.n
    computation = {"method": "exact order statistics", "passes": 1, "chunks": len(blocks), "kept": 0}
    ranks = sorted(set(ranks_of(n)))
    if not ranks:
        computation["text"] = f"exact statistics of the {n:,} draws in 1 pass over {len(blocks):,} chunks"
        return stats, {}, computation
    values = _radix_select(blocks, total.hist, ranks, computation)
    computation["text"] = (f"exact order statistics of the {n:,} draws in {computation['passes']} passes "
                           f"over {len(blocks):,} chunks, keeping {computation['kept']:,} draws "
                           "from the bins that hold the wanted ranks")
    return stats, values, computation


def _radix_select(blocks, hist, ranks, computation) -> dict:
    """The exact values of 0-based ``ranks`` given the merged top-bits histogram ``hist``:
    a pass keeping the draws of the bins that hold them (first, only when those bins hold
    more than KEEP_LIMIT draws, a pass per REFINE_BITS more bits). Counts its passes and
    kept draws into ``computation``."""
    import dask

    delayed = dask.delayed
    cum = np.cumsum(hist)
    # rank -> (prefix, shift, draws below that prefix)
    where = {}
    for k in ranks:
        b = int(np.searchsorted(cum, k, side="right"))
        where[k] = (b, TOP_SHIFT, int(cum[b - 1]) if b else 0)
    counts = {(b, TOP_SHIFT): int(hist[b]) for b, _, _ in where.values()}
    values = {}
    while True:
        groups = sorted({(p, s) for p, s, _ in where.values()})
        shift = groups[0][1]
        if shift == 0:
            # Each bin is one float value: its rank is known without keeping draws.
            values.update({k: key_value(p) for k, (p, _, _) in where.items()})
            return values
        if sum(counts[g] for g in groups) <= KEEP_LIMIT:
            kept_parts = [delayed(_keep)(b, groups) for b in blocks]
            (keys,) = dask.compute(_tree(delayed, kept_parts, lambda a, b: np.concatenate([a, b])))
            computation["passes"] += 1
            computation["kept"] = computation.get("kept", 0) + int(keys.size)
            # Sorting the keys, not the values, orders -0.0 before +0.0 as the histogram did.
            keys = np.sort(keys)
            for k, (p, s, below) in where.items():
                start = int(np.searchsorted(keys >> np.uint64(s), np.uint64(p), side="left"))
                values[k] = key_value(int(keys[start + k - below]))
            return values
        bits = min(REFINE_BITS, shift)
        parts = [delayed(_split_counts)(b, groups, bits) for b in blocks]
        (split,) = dask.compute(_tree(delayed, parts, lambda a, b: a + b))
        computation["passes"] += 1
        index = {g: i for i, g in enumerate(groups)}
        counts = {}
        for k, (p, s, below) in list(where.items()):
            row = split[index[(p, s)]]
            sub_cum = np.cumsum(row)
            sub = int(np.searchsorted(sub_cum, k - below, side="right"))
            new = ((p << bits) | sub, s - bits, below + (int(sub_cum[sub - 1]) if sub else 0))
            where[k] = new
            counts[(new[0], new[1])] = int(row[sub])
