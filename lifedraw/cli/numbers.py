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
