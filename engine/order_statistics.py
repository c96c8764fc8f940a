"""Exact order statistics and moments of a sample too large for memory, read chunk by chunk.

Selection by distribution counting on the bits of the numbers (a radix select: Knuth, TAOCP
vol. 3, 5.2.5): pass 1 sums moments, survivor counts and a histogram of each draw's top 20
bits in an order-preserving integer form; a rank falls in one known bin, and pass 2 keeps
only the draws of the bins that hold a wanted rank, then picks the exact ranks among them.
Moments are merged across chunks by Chan, Golub & LeVeque (1983), "Algorithms for
computing the sample variance", The American Statistician 37(3).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
import numpy as np

from .errors import ModelError

SIGN = np.uint64(1 << 63)
TOP_SHIFT = 44                 # pass 1 bins on the top 64 - 44 = 20 bits (sign, exponent, 8 mantissa bits)
REFINE_BITS = 16               # each extra pass (rarely needed) splits a bin on 16 more bits
KEEP_LIMIT = 1 << 22           # draws held in memory at most (32 MB) before a bin is split instead


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

def in_memory_pass(xs: np.ndarray, times: np.ndarray):
    """Statistics of a finite 1-D array in memory; ranks by ``np.partition`` (introselect)."""
    n = xs.size
    survivors = np.array([np.count_nonzero(xs > t) for t in times], dtype=np.int64)
    stats = SampleStats(n, float(np.mean(xs)), float(np.std(xs, ddof=1)) if n > 1 else math.nan, survivors)

    def select(ranks):
        if not ranks:
            return {}
        part = np.partition(xs, ranks)
        return {k: float(part[k]) for k in ranks}

    computation = {"method": "exact order statistics", "passes": 1, "chunks": 1, "kept": n,
                   "text": f"exact order statistics of the {n:,} draws, in memory"}
    return stats, select, computation


# ---- chunk by chunk ---------------------------------------------------------------------------

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
    """Chan, Golub & LeVeque (1983): pooled mean and sum of squared deviations."""
    n = a.n + b.n
    if a.n == 0 or b.n == 0:
        mean, m2 = (a.mean, a.m2) if b.n == 0 else (b.mean, b.m2)
    else:
        delta = b.mean - a.mean
        mean = a.mean + delta * b.n / n
        m2 = a.m2 + b.m2 + delta * delta * a.n * b.n / n
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


def chunked_pass(x, times: np.ndarray):
    """Statistics of a 1-D dask array, exact, holding one chunk per worker plus the kept draws.

    Returns (stats, select, computation); ``select(ranks)`` runs the second pass (and,
    only when the bins of the wanted ranks hold more than KEEP_LIMIT draws, a pass per
    REFINE_BITS more bits first) and returns the exact order statistics by 0-based rank.
    """
    import dask

    if x.ndim != 1:
        raise ModelError("samples", f"must be a 1-D array, got {x.ndim} dimensions")
    blocks = list(x.to_delayed().ravel())
    delayed = dask.delayed
    first = _tree(delayed, [delayed(_summarise)(b, times) for b in blocks], _merge)
    (total,) = dask.compute(first)
    if total.n == 0:
        raise ModelError("samples", "must not be empty")
    if total.bad:
        raise ModelError("samples", f"must be finite; {total.bad} are NaN or infinite")
    n = int(total.n)
    sd = math.sqrt(total.m2 / (n - 1)) if n > 1 else math.nan
    stats = SampleStats(n, float(total.mean), sd, total.survivors)
    computation = {"method": "exact order statistics", "passes": 1, "chunks": len(blocks), "kept": 0}

    def select(ranks) -> dict:
        if not ranks:
            return {}
        cum = np.cumsum(total.hist)
        # rank -> (prefix, shift, draws below that prefix)
        where = {}
        for k in ranks:
            b = int(np.searchsorted(cum, k, side="right"))
            where[k] = (b, TOP_SHIFT, int(cum[b - 1]) if b else 0)
        counts = {(b, TOP_SHIFT): int(total.hist[b]) for b, _, _ in where.values()}
        values = {}
        while True:
            groups = sorted({(p, s) for p, s, _ in where.values()})
            shift = groups[0][1]
            if shift == 0:
                # Each bin is one float value: its rank is known without keeping draws.
                values.update({k: key_value(p) for k, (p, _, _) in where.items()})
                break
            if sum(counts[g] for g in groups) <= KEEP_LIMIT:
                kept_parts = [delayed(_keep)(b, groups) for b in blocks]
                (keys,) = dask.compute(_tree(delayed, kept_parts, lambda a, b: np.concatenate([a, b])))
                computation["passes"] += 1
                computation["kept"] = int(keys.size)
                # Sorting the keys, not the values, orders -0.0 before +0.0 as the histogram did.
                keys = np.sort(keys)
                for k, (p, s, below) in where.items():
                    start = int(np.searchsorted(keys >> np.uint64(s), np.uint64(p), side="left"))
                    values[k] = key_value(int(keys[start + k - below]))
                break
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
        computation["text"] = (f"exact order statistics of the {n:,} draws in {computation['passes']} passes "
                               f"over {len(blocks):,} chunks, keeping {computation['kept']:,} draws "
                               "from the bins that hold the wanted ranks")
        return values

    computation["text"] = f"exact statistics of the {n:,} draws in 1 pass over {len(blocks):,} chunks"
    return stats, select, computation

