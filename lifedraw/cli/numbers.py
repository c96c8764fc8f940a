"""Argument types shared by the ``lifedraw`` subcommands."""
from __future__ import annotations

import argparse
import math


def whole_number(text: str) -> int:
    """Accept 100000, 1e5 or 1_000_000 for sizes; refuse fractions, infinities and NaN."""
    try:
        value = float(str(text).replace("_", ""))
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"not a finite number: {text!r}")
    if value != int(value):
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}")
    return int(value)


def seed_number(text: str) -> int:
    """A seed: a whole number from 0 to 2**128 - 1 (numpy's SeedSequence takes no negatives)."""
    try:
        value = int(str(text).replace("_", ""))
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
    if not 0 <= value < 2**128:
        raise argparse.ArgumentTypeError(f"a seed is a whole number from 0 to 2**128 - 1, got {text!r}")
    return value
