"""``engine.fit``: bind a method to a target and do its set-up; ``auto`` picks the
method from the target's properties and says why in ``sampler.reason``.
"""
from __future__ import annotations

import inspect

import time

import numpy as np

from .composite import MixtureTarget
from .errors import MethodNotApplicable, ModelError
from .field_data import HistogramTarget
from .methods import METHODS, method_names
from .methods.base import Sampler, check_tolerance
from .target import Target


def _throughput(sampler: Sampler, rng: int = 0, n: int = 1 << 16) -> float:
    """Draws per second on one warm batch (counters are reset afterwards)."""
    gen = np.random.default_rng(rng)
    sampler.sample(4096, gen)
    start = time.perf_counter()
    sampler.sample(n, gen)
    rate = n / max(time.perf_counter() - start, 1e-9)
    sampler.reset_counters()
    return rate


def _auto(target: Target, tolerance: float) -> Sampler:
    """The method ``auto`` uses, with a sentence a user can read saying why.

    Decided by the target's properties; where two methods both suit a target
    (a mixture: composition or inversion of the whole), both are built and
    the faster one on a measured batch wins.
    """
    if target.atoms.size or (isinstance(target, HistogramTarget) and not target.smooth):
        s = METHODS["table"].build(target, tolerance)
        s.reason = ("binned or discrete data: an alias table picks the bin or failure time in constant "
                    "time, then the draw is placed exactly within it")
        return s
    if target.exact_quantile:
        s = METHODS["inversion"].build(target, tolerance)
        s.reason = ("the model's inverse CDF is known exactly, so inversion needs one uniform per draw "
                    "and no set-up")
        return s
    if isinstance(target, MixtureTarget):
        inv = METHODS["inversion"].build(target, tolerance)
        comp = METHODS["composition"].build(target, tolerance)
        r_inv, r_comp = _throughput(inv), _throughput(comp)
        if r_comp > r_inv:
            comp.reason = (f"a mixture: picking the sub-population and drawing from it measured "
                           f"{r_comp / 1e6:.1f} M/s here, faster than inversion of the whole "
                           f"({r_inv / 1e6:.1f} M/s)")
            return comp
        inv.reason = (f"a mixture: inversion of the whole measured {r_inv / 1e6:.1f} M/s here, faster "
                      f"than composition ({r_comp / 1e6:.1f} M/s), with a measured u-error within the tolerance")
        return inv
    s = METHODS["inversion"].build(target, tolerance)
    s.reason = ("no closed-form inverse: numerical inversion needs one uniform and no density "
                "evaluation per draw, with a measured u-error within the tolerance")
    return s


def fit(target: Target, method: str = "auto", tolerance: float = 1e-10, **options) -> Sampler:
    """Build a sampler for ``target`` with the named method ("auto" chooses).

    Raises ModelError for bad arguments and MethodNotApplicable (a ModelError)
    when the named method cannot serve this target, with the reason.
    """
    if not isinstance(target, Target):
        raise ModelError("target", f"must be an engine.Target, got {type(target).__name__}")
    tolerance = check_tolerance(tolerance)
    name = str(method).strip().lower()
    if name == "auto":
        return _auto(target, tolerance)
    if name not in METHODS:
        raise ModelError("method", f"unknown method {method!r}; known: {', '.join(method_names())}")
    cls = METHODS[name]
    # The constructor's signature is read only when there are options to check (it costs more than
    # a whole small set-up's share of numpy calls).
    accepted = [k for k in inspect.signature(cls.__init__).parameters
                if k not in ("self", "target", "tolerance")] if options else []
    for key in options:
        if key not in accepted:
            raise ModelError(str(key), f"not an option of the {name} method "
                                       f"(its options: {', '.join(accepted) or 'none'})")
    sampler = cls.build(target, tolerance, **options)
    sampler.reason = f"{name} was requested"
    return sampler


def applicable_methods(target: Target) -> dict[str, str | None]:
    """Each method name -> None if it can serve ``target``, else the reason it cannot."""
    out: dict[str, str | None] = {}
    for name, cls in METHODS.items():
        try:
            cls.check_applicable(target)
            out[name] = None
        except MethodNotApplicable as err:
            out[name] = err.reason
    return out
