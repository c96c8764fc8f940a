"""lifedraw's engine: exact, fast random lifetimes from reliability models.

Plain Python, no user-interface imports: build a ``Target`` (the lifetime model),
``fit`` a sampler to it, draw with ``sampler.sample(n, rng)``, prove it with ``check``.
"""
from .errors import MethodNotApplicable, ModelError
from .target import Target
from .sampling import applicable_methods, fit
from .storage import load_sampler as load

__all__ = ["Target", "fit", "load", "check", "life_summary", "exact_life_figures", "fit_family",
           "applicable_methods", "ModelError", "MethodNotApplicable"]


def __getattr__(name):
    # The statistics modules pull in more of scipy; load them on first use.
    if name == "check":
        from .check import check
        return check
    if name in ("life_summary", "exact_life_figures"):
        from . import life
        return getattr(life, name)
    if name == "fit_family":
        from .fitting import fit_family
        return fit_family
    raise AttributeError(f"module 'engine' has no attribute {name!r}")
