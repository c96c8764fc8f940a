"""Systems from scenario files: a [system] table (structures with parts, copies, names,
per-part method and tolerance) turned into a System, parameter names resolved like [model].

The table layout is lifedraw's own (DEVELOPERS.md, "Adding a scenario"); the structures follow
NIST/SEMATECH e-Handbook 8.1.8.
"""
from __future__ import annotations

from typing import Mapping

from .errors import ModelError
from .cold_standby import Standby
from .system_parts import Block, Component
from .system_structures import STRUCTURES, KOutOfN, Parallel, Series, System

# Keys a part table of a scenario's [system] may carry besides its model or structure.
_PART_KEYS = {"name", "copies", "method", "tolerance"}


def system_from_spec(spec: Mapping, path: str = "system", method: str = "auto",
                     tolerance: float = 1e-10) -> System:
    """Build a system from a [system] table whose parameter names are already resolved.

    A table with ``kind`` in series/parallel/k_out_of_n/standby is a structure with
    ``parts`` (and ``k``); any other table is a model, as in [model]. Any part may
    carry ``name``, ``copies`` (that many identical, independent parts), and a model
    part ``method`` and ``tolerance``.
    """
    from .scenarios import MAX_NESTING, nesting_depth
    if nesting_depth(spec, MAX_NESTING) > MAX_NESTING:
        raise ModelError(path, f"nests tables deeper than {MAX_NESTING} levels")
    block = block_from_spec(spec, path, method, tolerance)
    if not isinstance(block, System):
        raise ModelError(f"{path}.kind", f"the top of a system must be one of {', '.join(STRUCTURES)}")
    return block


def system_from_scenario(scenario, **overrides) -> System:
    """The scenario's [system] table as a System (parameter names resolved like [model])."""
    from .scenarios import resolve_parameters
    if not scenario.system:
        raise ModelError("system", f"scenario {scenario.name!r} has no [system] table")
    resolved = resolve_parameters(scenario.system, scenario.values(**overrides), "system")
    return system_from_spec(resolved, "system", tolerance=scenario.tolerance)


def block_from_spec(spec, path, method, tolerance) -> Block:
    if not isinstance(spec, Mapping):
        raise ModelError(path, "must be a table")
    kind = str(spec.get("kind", "")).lower()
    name = str(spec.get("name", ""))
    if kind in STRUCTURES:
        parts_spec = spec.get("parts")
        if not isinstance(parts_spec, (list, tuple)) or not parts_spec:
            raise ModelError(f"{path}.parts", "must be a non-empty list of part tables")
        parts = []
        for i, part in enumerate(parts_spec):
            copies = _copies(part, f"{path}.parts[{i}]")
            block = block_from_spec(part, f"{path}.parts[{i}]", method, tolerance)
            parts.extend([block] * copies)
        try:
            if kind == "k_out_of_n":
                if "k" not in spec:
                    raise ModelError("k", "missing (how many parts must work)")
                return KOutOfN(spec["k"], parts, name)
            return {"series": Series, "parallel": Parallel, "standby": Standby}[kind](parts, name)
        except ModelError as err:
            raise ModelError(f"{path}.{err.field}", err.reason) from None
    from .sampling import fit
    from .specs import target_from_spec
    model = {k: v for k, v in spec.items() if k not in _PART_KEYS}
    target = target_from_spec(model, path)
    try:
        sampler = fit(target, str(spec.get("method", method)), float(spec.get("tolerance", tolerance)))
    except ModelError as err:
        raise ModelError(f"{path}.{err.field}", err.reason) from None
    return Component(sampler, name)


def _copies(part, path) -> int:
    raw = part.get("copies", 1) if isinstance(part, Mapping) else 1
    if isinstance(raw, bool) or not isinstance(raw, int) or raw < 1:
        raise ModelError(f"{path}.copies", f"must be a whole number >= 1, got {raw!r}")
    return raw
