"""Errors the engine raises, and the few shared validators that raise them.

Every invalid input ends in a ``ModelError`` whose message names the field and
the reason, so the CLI and the dashboard can show it next to the field.
"""
from __future__ import annotations

import math
from numbers import Real

import numpy as np


class ModelError(ValueError):
    """An input (model, parameter, formula, file, size) that the engine cannot use.

    ``field`` names the offending input (``"shape"``, ``"formula"``, ``"row 7"``),
    ``reason`` says what is wrong with it.
    """

    def __init__(self, field: str, reason: str):
        self.field = field
        self.reason = reason
        super().__init__(f"{field}: {reason}")


class MethodNotApplicable(ModelError):
    """A sampling method cannot serve a target; the reason says why."""


def finite_number(field: str, value, *, positive: bool = False,
                  nonnegative: bool = False, low=None, high=None) -> float:
    """Return ``value`` as a float, or raise ModelError naming ``field``."""
    if isinstance(value, bool) or not isinstance(value, (Real, np.number)):
        try:
            value = float(value)
        except (TypeError, ValueError):
            raise ModelError(field, f"must be a number, got {str(value)[:40]!r}") from None
        except OverflowError:
            raise ModelError(field, "must be finite; the number is beyond double precision (1.8e308)") from None
    try:
        value = float(value)
    except OverflowError:
        raise ModelError(field, "must be finite; the number is beyond double precision (1.8e308)") from None
    if math.isnan(value):
        raise ModelError(field, "must be a number, got NaN")
    if math.isinf(value):
        raise ModelError(field, f"must be finite, got {value}")
    if positive and value <= 0:
        raise ModelError(field, f"must be > 0, got {value:g}")
    if nonnegative and value < 0:
        raise ModelError(field, f"must be >= 0, got {value:g}")
    if low is not None and value < low:
        raise ModelError(field, f"must be >= {low:g}, got {value:g}")
    if high is not None and value > high:
        raise ModelError(field, f"must be <= {high:g}, got {value:g}")
    return value


def censoring_flags(field: str, flags, n: int) -> np.ndarray:
    """Suspension flags as a bool array of length n (None: all failures).

    Only true/false or the numbers 0/1 are flags; text such as "no", NaN or 2 is
    refused naming the entry, never read as a suspension.
    """
    if flags is None:
        return np.zeros(n, dtype=bool)
    try:
        c = np.asarray(flags)
    except (TypeError, ValueError):
        raise ModelError(field, "must be true/false flags (true = suspension)") from None
    if c.ndim == 0:
        c = c.reshape(1)
    if c.ndim != 1 or c.size != n:
        raise ModelError(field, f"{c.size} flags for {n} times; give one flag per time")
    if c.dtype != bool:
        try:
            numeric = c.astype(float)
        except (TypeError, ValueError):
            raise ModelError(field, "must be true/false flags (true = suspension), "
                                    f"got {str(c.ravel()[0])[:20]!r}") from None
        bad = np.flatnonzero((numeric != 0) & (numeric != 1))
        if bad.size:
            i = int(bad[0])
            raise ModelError(field, f"value {c[i]!r} (row {i + 1}) is not a true/false flag")
        c = numeric.astype(bool)
    return c


def sample_size(field: str, n, *, limit: int | None = None) -> int:
    """Validate a sample size: a whole number >= 0 that fits in memory.

    ``limit`` defaults to the number of float64 values that fit in half of the
    machine's available memory; beyond it the chunked generator
    (``engine.generate``) is the right tool.
    """
    try:
        as_float = float(n)
    except (TypeError, ValueError):
        raise ModelError(field, f"must be a whole number, got {str(n)[:40]!r}") from None
    except OverflowError:
        raise ModelError(field, f"{str(n)[:12]}... draws are far more than fits in memory; draw in chunks "
                                "with engine.generate(...) or 'lifedraw generate'") from None
    if isinstance(n, bool) or not math.isfinite(as_float) or as_float != math.floor(as_float):
        raise ModelError(field, f"must be a whole number, got {n!r}")
    n = int(as_float)
    if n < 0:
        raise ModelError(field, f"must be >= 0, got {n}")
    if limit is None:
        limit = memory_limit_values()
    if n > limit:
        raise ModelError(
            field,
            f"{n:.3g} draws need {n * 8 / 2**30:.1f} GiB, more than fits in memory here "
            f"(limit {limit:.3g}); draw them in chunks with engine.generate(...) "
            "or 'lifedraw generate'",
        )
    return n


def random_generator(rng, field: str = "seed") -> np.random.Generator:
    """``np.random.default_rng(rng)`` for a seed (a whole number >= 0), a SeedSequence, a
    BitGenerator, a Generator or None; anything else (-1, "abc", 1.5) is a ModelError."""
    if rng is None or isinstance(rng, (np.random.Generator, np.random.SeedSequence, np.random.BitGenerator)):
        return np.random.default_rng(rng)
    if isinstance(rng, bool) or not isinstance(rng, (int, np.integer)):
        raise ModelError(field, f"must be a whole number >= 0 (or a numpy Generator), got {str(rng)[:40]!r}")
    if rng < 0:
        raise ModelError(field, f"must be >= 0, got {rng}")
    return np.random.default_rng(int(rng))


def memory_limit_values() -> int:
    """How many float64 draws fit in half of the memory available now."""
    try:
        import os

        pages = os.sysconf("SC_AVPHYS_PAGES")
        page_size = os.sysconf("SC_PAGE_SIZE")
        available = pages * page_size
    except (ValueError, OSError, AttributeError):
        available = 8 * 2**30
    # Sampling needs the output plus a few temporaries of similar size.
    return int(available / 2 / 8 / 3)
