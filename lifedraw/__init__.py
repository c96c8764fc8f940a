"""lifedraw: exact, fast random lifetimes from reliability models, proven against the model.

The public API lives here::

    import lifedraw
    gearbox = lifedraw.family("weibull", shape=2.6, scale=31000)
    sampler = lifedraw.fit(gearbox)
    x = sampler.sample(1_000_000, rng=42)

Layers point down only: ``lifedraw.engine`` (models, methods, checks; plain numpy/scipy)
<- ``lifedraw.dashboard`` (the browser page and report) <- ``lifedraw.cli`` (the command).
"""
from importlib.metadata import PackageNotFoundError, version as _version

from .engine import *  # noqa: F401,F403  (the engine's public API is the package's)
from .engine import __all__ as _engine_all

try:
    __version__ = _version("lifedraw")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0+unknown"

__all__ = [*_engine_all, "__version__"]
