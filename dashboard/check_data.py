"""Plain data for the live check's pictures, shared by the page and the report: expected bin
shares from cdf differences, QQ and PP points at (i + 0.5)/m plotting positions."""
from __future__ import annotations

import numpy as np

from .cdf_table import CdfTable
from .draw_accumulator import DrawAccumulator


PLOT_POINTS = 200


# ---- plain data for the plots (shared with the report) --------------------------------------

def model_on_bins(target, edges: np.ndarray):
    """Expected share of each bin from cdf differences, and the density on a grid (None with atoms)."""
    F = np.asarray(target.cdf(edges), dtype=float)
    F[0] = float(target.cdf(np.nextafter(edges[0], -np.inf)))   # the first bin is closed on the left
    if target.atoms.size:
        return np.diff(F), None, None
    x = np.linspace(edges[0], edges[-1], 801)
    return np.diff(F), x, np.asarray(target.pdf(x), dtype=float)


def histogram_payload(acc: DrawAccumulator, model_bins, view_right: float, log: bool, unit: str) -> dict:
    expected, x, y = model_bins
    return {"edges": acc.edges, "counts": acc.counts.copy(), "n": acc.n, "below": acc.below,
            "above": acc.above, "expected": expected, "model_x": x, "model_pdf": y,
            "view_right": view_right, "log": bool(log), "unit": unit}


def qq_payload(acc: DrawAccumulator, table: CdfTable, unit: str) -> dict:
    p = (np.arange(PLOT_POINTS) + 0.5) / PLOT_POINTS
    return {"p": p, "model": table.quantile(p), "sample": acc.sample_quantiles(p), "unit": unit,
            "n": int(acc.x.size)}


def pp_payload(acc: DrawAccumulator, table: CdfTable) -> dict:
    p = (np.arange(PLOT_POINTS) + 0.5) / PLOT_POINTS
    xq = acc.sample_quantiles(p)
    model_p = table.cdf(xq) if acc.x.size else np.full_like(p, np.nan)
    return {"empirical": p, "model": model_p, "n": int(acc.x.size)}
