"""lifedraw's engine: exact, fast random lifetimes from reliability models.

Plain Python, no user-interface imports: build a ``Target`` (the lifetime model),
``fit`` a sampler to it, draw with ``sampler.sample(n, rng)``, prove it with ``check``.
"""
from .errors import MethodNotApplicable, ModelError
from .target import Target
from .sampling import applicable_methods, fit
from .storage import load_sampler as load
# Function names that shadow their modules (engine.check is the function).
from .check import check
from .life import exact_life_figures, life_summary
from .fitting import fit_family
from .generate import generate
from .systems import k_out_of_n, parallel, series, standby

__all__ = ["Target", "fit", "load", "check", "life_summary", "exact_life_figures", "fit_family",
           "applicable_methods", "generate", "series", "parallel", "k_out_of_n", "standby",
           "ModelError", "MethodNotApplicable"]
