"""Set-up time side by side: lifedraw's model-from-formula plus numerical inversion against
scipy's NumericalInversePolynomial, alternating, cold and warm.

Warm: the formula's text was parsed before (Formula.parse keeps it), as when a slider moves a
parameter and the model is rebuilt with new numbers; every number is still computed afresh.
Cold: the store of parsed formulas is emptied before each build, as for a formula typed for the
first time. Both alternate with the reference, so drifts of a shared machine hit both alike.
"""
from __future__ import annotations

import statistics
import time

from lifedraw.engine.formula import forget_parsed

REPEATS = 15


def setup_rows(name, build_sampler, build_reference, repeats: int = REPEATS) -> list[dict]:
    build_sampler(), build_reference()                  # warm-up (imports, compiled kernels)
    times = {"cold": [], "warm": [], "ref": []}
    for _ in range(repeats):
        for kind in ("cold", "warm"):
            if kind == "cold":
                forget_parsed()
            start = time.perf_counter()
            build_sampler()
            times[kind].append(time.perf_counter() - start)
            start = time.perf_counter()
            build_reference()
            times["ref"].append(time.perf_counter() - start)
    ref = statistics.median(times["ref"])
    rows = []
    for kind, what in (("warm", "formula parsed before, as after a slider move (every number computed afresh)"),
                       ("cold", "formula parsed for the first time")):
        ours = statistics.median(times[kind])
        rows.append(dict(section="1b. set-up time vs NumericalInversePolynomial",
                         target=name + (", cold" if kind == "cold" else ""), ours=ours * 1e3, ref=ref * 1e3,
                         ratio=ours / ref,
                         goal=-1.0, note=f"milliseconds, model built from its formula plus the sampler's "
                                         f"set-up; {what}; median of {repeats} alternating runs"))
    return rows
