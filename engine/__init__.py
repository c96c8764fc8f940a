"""lifedraw's engine: exact, fast random lifetimes from reliability models.

Plain Python, no user-interface imports: build a model (``family``, ``hazard_formula``, ...,
each a ``Target``), ``fit`` a sampler to it, draw with ``sampler.sample(n, rng)``, prove it
with ``check``.
"""
from .errors import MethodNotApplicable, ModelError
from .target import Target
from .models import (binned_counts, cdf_formula, competing, density_formula, failure_times, family, from_spec,
                     hazard_formula, mixture)
from .sampling import applicable_methods, fit
from .storage import load_sampler as load
# Function names that shadow their modules (engine.check is the function).
from .check import check
from .life import exact_life_figures, format_life_figures, life_summary
from .fitting import fit_family
from .generate import generate
from .systems import k_out_of_n, parallel, series, standby
from .renewal import renewal_density, renewal_function
from .fleet import simulate_fleet
from .age_replacement import age_replacement
from .warranty import warranty_claims

__all__ = ["Target", "family", "density_formula", "hazard_formula", "cdf_formula", "binned_counts",
           "failure_times", "mixture", "competing", "from_spec",
           "fit", "load", "check", "life_summary", "exact_life_figures", "format_life_figures", "fit_family",
           "applicable_methods", "generate", "series", "parallel", "k_out_of_n", "standby",
           "renewal_function", "renewal_density", "simulate_fleet", "age_replacement", "warranty_claims",
           "ModelError", "MethodNotApplicable"]
