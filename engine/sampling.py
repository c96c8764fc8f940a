"""``engine.fit``: bind a method to a target and do its set-up; ``auto`` picks the
method from the target's properties and says why in ``sampler.reason``.
"""
from __future__ import annotations

from .errors import MethodNotApplicable, ModelError
from .methods import METHODS, method_names
from .methods.base import Sampler, check_tolerance
from .target import Target


def _choose(target: Target) -> tuple[str, str]:
    """The method ``auto`` uses, and a sentence a user can read saying why."""
    if target.exact_quantile:
        return "inversion", ("the model's inverse CDF is known exactly, so inversion needs one "
                             "uniform per draw and no set-up")
    return "inversion", ("numerical inversion: one uniform per draw, no density evaluations "
                         "while drawing, and a measured u-error within the tolerance")


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
        chosen, why = _choose(target)
        sampler = METHODS[chosen].build(target, tolerance, **options)
        sampler.reason = why
        return sampler
    if name not in METHODS:
        raise ModelError("method", f"unknown method {method!r}; known: {', '.join(method_names())}")
    sampler = METHODS[name].build(target, tolerance, **options)
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
