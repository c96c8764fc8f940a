"""lifedraw: exact, fast random lifetimes from reliability models, proven against the model.

The public API lives here::

    import lifedraw
    gearbox = lifedraw.family("weibull", shape=2.6, scale=31000)
    sampler = lifedraw.fit(gearbox)
    x = sampler.sample(1_000_000, rng=42)

Layers point down only: ``lifedraw.engine`` (models, methods, checks; plain numpy/scipy)
<- ``lifedraw.dashboard`` (the browser page and report) <- ``lifedraw.cli`` (the command).

The engine's names (and ``__version__``) are loaded on first use (PEP 562 module ``__getattr__``), so the
command line and the report's picture process import only what they need: ``import lifedraw`` alone costs
no scipy or numba.
"""
from importlib import import_module

#: The engine's public API (``lifedraw.engine.__all__``), re-exported; tests/test_picture_process.py checks both agree.
ENGINE_NAMES = ("Target", "family", "density_formula", "hazard_formula", "cdf_formula", "binned_counts",
                "failure_times", "mixture", "competing", "from_spec",
                "fit", "load", "check", "life_summary", "exact_life_figures", "format_life_figures", "fit_family",
                "applicable_methods", "generate", "series", "parallel", "k_out_of_n", "standby",
                "renewal_function", "renewal_density", "simulate_fleet", "age_replacement", "warranty_claims",
                "ModelError", "MethodNotApplicable")
SUBPACKAGES = ("engine", "dashboard", "cli", "scenarios")

__all__ = [*ENGINE_NAMES, "__version__"]


def _installed_version() -> str:
    from importlib.metadata import PackageNotFoundError, version
    try:
        return version("lifedraw")
    except PackageNotFoundError:  # running from a source tree that was never installed
        return "0+unknown"


def __getattr__(name):
    if name == "__version__":       # read from the installed metadata on first use (importlib.metadata: 25 ms)
        value = _installed_version()
    elif name in ENGINE_NAMES:
        value = getattr(import_module(".engine", __name__), name)
    elif name in SUBPACKAGES:
        value = import_module(f".{name}", __name__)
    else:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    globals()[name] = value     # looked up once
    return value


def __dir__():
    return sorted({*globals(), *ENGINE_NAMES, *SUBPACKAGES, "__version__"})
