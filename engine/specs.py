"""Plain-data descriptions of targets (the ``model`` table of a scenario file, the
metadata of a saved sampler), and their conversion to and from ``Target`` objects.

A spec is a dict of strings, numbers and lists, so it round-trips through TOML and JSON.
"""
from __future__ import annotations

import math
from typing import Any, Mapping

from . import models
from .errors import ModelError
from .target import Target

KINDS = ("family", "density", "hazard", "cdf", "histogram", "failures", "mixture", "competing", "residual",
         "system")


def _get(spec: Mapping, key: str, path: str):
    if key not in spec:
        raise ModelError(f"{path}.{key}" if path else key, "missing")
    return spec[key]


def _support(spec: Mapping, path: str):
    raw = spec.get("support", [0.0, math.inf])
    if isinstance(raw, (list, tuple)) and len(raw) == 2:
        return tuple(math.inf if v in ("inf", "Infinity") else -math.inf if v in ("-inf", "-Infinity") else v
                     for v in raw)
    raise ModelError(f"{path}.support" if path else "support", "must be a list [lo, hi]")


def target_from_spec(spec: Mapping[str, Any], path: str = "model") -> Target:
    """Build a Target from its spec; errors name the field by its path in the spec."""
    if not isinstance(spec, Mapping):
        raise ModelError(path, "must be a table")
    kind = str(_get(spec, "kind", path)).lower()
    try:
        if kind == "family":
            params = dict(spec.get("params", {}))
            return models.family(_get(spec, "family", path), **params)
        if kind == "density":
            return models.density_formula(_get(spec, "expr", path), _support(spec, path), dict(spec.get("params", {})))
        if kind == "hazard":
            return models.hazard_formula(_get(spec, "expr", path), _support(spec, path), dict(spec.get("params", {})))
        if kind == "cdf":
            return models.cdf_formula(_get(spec, "expr", path), _support(spec, path), dict(spec.get("params", {})))
        if kind == "histogram":
            return models.binned_counts(_get(spec, "edges", path), _get(spec, "counts", path),
                                    smooth=bool(spec.get("smooth", False)))
        if kind == "failures":
            return models.failure_times(_get(spec, "times", path), spec.get("censored"))
        if kind == "mixture":
            comps = [target_from_spec(c, f"{path}.components[{i}]")
                     for i, c in enumerate(_get(spec, "components", path))]
            return models.mixture(comps, _get(spec, "weights", path))
        if kind == "competing":
            comps = [target_from_spec(c, f"{path}.components[{i}]")
                     for i, c in enumerate(_get(spec, "components", path))]
            return models.competing(comps)
        if kind == "system":
            from .systems import SystemTarget, system_from_spec
            return SystemTarget(system_from_spec(_get(spec, "system", path)))
        if kind == "residual":
            base = target_from_spec(_get(spec, "base", path), f"{path}.base")
            return base.given_survival(_get(spec, "age", path))
    except ModelError as err:
        if err.field.startswith(path):
            raise
        raise ModelError(f"{path}.{err.field}", err.reason) from None
    except RecursionError:
        raise ModelError(path, "nests models too deeply") from None
    except (TypeError, ValueError, AttributeError, KeyError, IndexError, OverflowError) as err:
        # A value of the wrong type somewhere in the table (a list where a table belongs, ...).
        raise ModelError(path, f"is malformed ({type(err).__name__}: {str(err)[:200]})") from None
    raise ModelError(f"{path}.kind", f"unknown kind {kind!r}; known: {', '.join(KINDS)}")
