"""The probability axis on Weibull scales, ln(-ln(1 - F)): its transform, plotting positions and ticks.

Plain numpy, shared by the plot data (life_curves) and the picture (reliability_plots), which draws it
without loading scipy (NIST/SEMATECH e-Handbook 8.2.2.1 and 1.3.3.30, Weibull plot).
"""
from __future__ import annotations

import numpy as np

#: Probability-plot positions: from 0.1 % to 99.9 %, spaced evenly on the Weibull scale.
WEIBULL_P = 1.0 - np.exp(-np.exp(np.linspace(np.log(-np.log(0.999)), np.log(-np.log(0.001)), 120)))
#: Tick positions of the probability axis (cumulative share failed).
WEIBULL_TICKS = (0.001, 0.01, 0.05, 0.1, 0.2, 0.3, 0.632, 0.9, 0.99, 0.999)


def weibull_y(p) -> np.ndarray:
    """The Weibull probability scale: ln(-ln(1 - F)). A Weibull cdf is a straight line in ln t
    with slope beta (NIST/SEMATECH e-Handbook 8.2.2.1 and 1.3.3.30, Weibull plot)."""
    p = np.asarray(p, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log(-np.log1p(-p))
