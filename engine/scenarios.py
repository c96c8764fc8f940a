"""Scenario files: a fictional reliability story, its lifetime model, the
parameters a user may vary (with slider ranges) and the run settings, in TOML.

The layout is lifedraw's own; DEVELOPERS.md ("Adding a scenario") documents it.
Model values may name a parameter (a string) instead of giving a number.
"""
from __future__ import annotations

import difflib
import math
import os
import tomllib
import unicodedata
from importlib import resources
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Mapping

import tomli_w

from .errors import ModelError, finite_number
from .fleet_settings import FleetSettings, fleet_settings
from .output_files import check_destination, write_atomically
from .specs import target_from_spec
from .target import Target

#: The package that ships the scenario files (read with importlib.resources, so a wheel works anywhere).
SHIPPED_SCENARIOS = "lifedraw.scenarios"
#: Folders of the user's own scenarios (separated like PATH); their names shadow shipped ones.
USER_SCENARIOS_ENV = "LIFEDRAW_SCENARIOS"

# Keys under which a string in a model table names a parameter.
_VALUE_KEYS = {"params", "weights", "age", "support", "location"}
_FORMULA_KINDS = {"density", "hazard", "cdf"}


@dataclass(frozen=True)
class Parameter:
    """A model value the user may vary, with its slider range."""

    name: str
    value: float
    low: float
    high: float
    step: float
    label: str = ""

    def clipped(self, value: float) -> float:
        return min(max(float(value), self.low), self.high)


@dataclass(frozen=True)
class Scenario:
    name: str
    title: str
    story: str
    model: dict
    parameters: dict[str, Parameter] = field(default_factory=dict)
    time_unit: str = "hours"
    method: str = "auto"
    seed: int = 20261201
    sample_size: int = 100_000
    mission_times: tuple[float, ...] = ()
    tolerance: float = 1e-10
    system: dict | None = None
    path: Path | None = None
    #: The optional [fleet] table (engine.fleet_settings), validated.
    fleet: FleetSettings | None = None

    # ---- the model -----------------------------------------------------------------
    def values(self, **overrides) -> dict[str, float]:
        out = {k: p.value for k, p in self.parameters.items()}
        for k, v in overrides.items():
            if k not in self.parameters:
                raise ModelError(k, f"not a parameter of scenario {self.name!r} "
                                    f"(parameters: {', '.join(self.parameters) or 'none'})")
            out[k] = finite_number(k, v)
        return out

    def model_spec(self, **overrides) -> dict:
        """The model table with every parameter name replaced by its value."""
        return resolve_parameters(self.model, self.values(**overrides), "model")

    def target(self, **overrides) -> Target:
        return target_from_spec(self.model_spec(**overrides), "model")

    def with_values(self, **values) -> "Scenario":
        """The same scenario with new parameter values (kept inside their ranges)."""
        params = dict(self.parameters)
        for k, v in self.values(**values).items():
            params[k] = replace(params[k], value=float(v))
        return replace(self, parameters=params)

    # ---- files -----------------------------------------------------------------------
    def to_dict(self) -> dict:
        out: dict[str, Any] = {"title": self.title, "story": self.story, "time_unit": self.time_unit,
                               "run": {"method": self.method, "seed": self.seed,
                                       "sample_size": self.sample_size,
                                       "mission_times": list(self.mission_times),
                                       "tolerance": self.tolerance}}
        if self.parameters:
            out["parameters"] = {k: {"value": p.value, "min": p.low, "max": p.high, "step": p.step,
                                     **({"label": p.label} if p.label else {})}
                                 for k, p in self.parameters.items()}
        out["model"] = self.model
        if self.system:
            out["system"] = self.system
        if self.fleet is not None:
            out["fleet"] = self.fleet.to_table()
        return out

    def to_toml(self) -> str:
        # A comment line ends at a new line and TOML allows no control characters in it: a title
        # with either would break the file or smuggle in keys of its own.
        title = " ".join("".join(" " if unicodedata.category(c)[0] == "C" else c for c in self.title).split())
        header = f"# lifedraw scenario: {title}\n"
        return header + tomli_w.dumps(_toml_safe(self.to_dict()))

    def save(self, path, *, overwrite: bool = False) -> Path:
        """Write the scenario as TOML, atomically; an existing file is replaced only with ``overwrite``."""
        path = check_destination(path, force=overwrite, suffixes=(".toml",), field="path")
        return write_atomically(path, self.to_toml(), field="path")


def _toml_safe(value):
    if isinstance(value, float) and math.isinf(value):
        return value
    if isinstance(value, dict):
        return {k: _toml_safe(v) for k, v in value.items() if v is not None}
    if isinstance(value, (list, tuple)):
        return [_toml_safe(v) for v in value]
    return value


def resolve_parameters(node, values: Mapping[str, float], path: str, in_values: bool = False):
    """A copy of a scenario table with every parameter name (a string where a number belongs) replaced
    by its value; ``path`` names the table in error messages."""
    if isinstance(node, Mapping):
        out = {}
        for k, v in node.items():
            out[k] = resolve_parameters(v, values, f"{path}.{k}", in_values or k in _VALUE_KEYS)
        if out.get("kind") in _FORMULA_KINDS and "params" not in node:
            out["params"] = dict(values)
        return out
    if isinstance(node, list):
        return [resolve_parameters(v, values, f"{path}[{i}]", in_values) for i, v in enumerate(node)]
    if in_values and isinstance(node, str):
        if node in ("inf", "-inf"):
            return float(node)
        if node not in values:
            raise ModelError(path, f"names parameter {node!r}, which the [parameters] table "
                                   f"does not define (defined: {', '.join(values) or 'none'})")
        return values[node]
    return node


def _parameter(name: str, raw, path: str) -> Parameter:
    if isinstance(raw, (int, float)) and not isinstance(raw, bool):
        v = finite_number(path, raw)
        span = abs(v) if v else 1.0
        return Parameter(name, v, v - span, v + span, span / 100)
    if not isinstance(raw, Mapping):
        raise ModelError(path, "must be a number or a table {value, min, max, step}")
    v = finite_number(f"{path}.value", raw.get("value"))
    low = finite_number(f"{path}.min", raw.get("min", v))
    high = finite_number(f"{path}.max", raw.get("max", v))
    if not low <= v <= high:
        raise ModelError(path, f"value {v:g} lies outside its range [{low:g}, {high:g}]")
    step = finite_number(f"{path}.step", raw.get("step", (high - low) / 100 or 1.0), positive=True)
    return Parameter(name, v, low, high, step, str(raw.get("label", "")))


# The keys a scenario file may use; any other key is named with the closest known one.
_TOP_KEYS = ("title", "story", "time_unit", "run", "parameters", "model", "system", "fleet")
_RUN_KEYS = ("method", "seed", "sample_size", "mission_times", "tolerance")
# Deeper than this, a scenario table is not a reliability model but a denial of service.
MAX_NESTING = 64
# Bigger than this, a scenario file is data, not a scenario (field data goes in CSV).
MAX_SCENARIO_BYTES = 16 * 2**20


def _known_keys(table: Mapping, known, path: str) -> None:
    for key in table:
        if key not in known:
            close = difflib.get_close_matches(str(key), known, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else f"; known keys: {', '.join(known)}"
            raise ModelError(f"{path}{key}", f"is not a key lifedraw knows{hint}")


def _table(data: Mapping, key: str, path: str = "") -> Mapping:
    value = data.get(key, {})
    if not isinstance(value, Mapping):
        raise ModelError(f"{path}{key}", f"must be a table, got {type(value).__name__}")
    return value


def nesting_depth(value, limit: int) -> int:
    """Depth of nested tables and lists, walked without recursion, stopping past ``limit``."""
    stack, deepest = [(value, 1)], 0
    while stack and deepest <= limit:
        item, depth = stack.pop()
        deepest = max(deepest, depth)
        if isinstance(item, Mapping):
            stack.extend((v, depth + 1) for v in item.values())
        elif isinstance(item, (list, tuple)):
            stack.extend((v, depth + 1) for v in item)
    return deepest


def _whole(field: str, value, low: int, high: int) -> int:
    """A whole number in [low, high]: 1.5, "7", true and inf are refused, not rounded."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ModelError(field, f"must be a whole number, got {value!r}")
    if isinstance(value, float) and not (math.isfinite(value) and value == math.floor(value)):
        raise ModelError(field, f"must be a whole number, got {value!r}")
    value = int(value)
    if not low <= value <= high:
        raise ModelError(field, f"must lie between {low} and {high:.3g}, got {value}")
    return value


def _text(field: str, value, limit: int = 100_000) -> str:
    if not isinstance(value, str):
        raise ModelError(field, f"must be text, got {type(value).__name__}")
    if len(value) > limit:
        raise ModelError(field, f"is {len(value):,} characters long; the limit is {limit:,}")
    return value


def scenario_from_dict(data: Mapping, name: str, path: Path | None = None) -> Scenario:
    if not isinstance(data, Mapping):
        raise ModelError("scenario", "must be a table")
    if nesting_depth(data, MAX_NESTING) > MAX_NESTING:
        raise ModelError("scenario", f"nests tables or lists deeper than {MAX_NESTING} levels")
    _known_keys(data, _TOP_KEYS, "")
    for key in ("title", "model"):
        if key not in data:
            raise ModelError(key, "missing from the scenario file")
    run = _table(data, "run")
    _known_keys(run, _RUN_KEYS, "run.")
    params = {k: _parameter(k, v, f"parameters.{k}") for k, v in _table(data, "parameters").items()}
    model = _table(data, "model")
    seed = _whole("run.seed", run.get("seed", 20261201), 0, 2**63 - 1)
    size = _whole("run.sample_size", run.get("sample_size", 100_000), 1, 10**15)
    missions = run.get("mission_times", [])
    if not isinstance(missions, list):
        raise ModelError("run.mission_times", "must be a list of ages")
    missions = tuple(finite_number("run.mission_times", m, nonnegative=True) for m in missions)
    system = data.get("system")
    if system is not None and not isinstance(system, Mapping):
        raise ModelError("system", f"must be a table, got {type(system).__name__}")
    sc = Scenario(name=name, title=_text("title", data["title"], 1000),
                  story=_text("story", data.get("story", "")).strip(),
                  model=dict(model), parameters=params,
                  time_unit=_text("time_unit", data.get("time_unit", "hours"), 100),
                  method=_text("run.method", run.get("method", "auto"), 100),
                  seed=seed, sample_size=size, mission_times=missions,
                  tolerance=finite_number("run.tolerance", run.get("tolerance", 1e-10), positive=True),
                  system=system, path=path,
                  fleet=fleet_settings(data["fleet"]) if "fleet" in data else None)
    sc.target()  # fail early, with the field named, if the model is invalid
    return sc


def scenario_folders() -> list:
    """Where scenarios are found: the user's folders (``$LIFEDRAW_SCENARIOS``) first, then the shipped ones."""
    user = [Path(p) for p in os.environ.get(USER_SCENARIOS_ENV, "").split(os.pathsep) if p.strip()]
    return [*user, resources.files(SHIPPED_SCENARIOS)]


def scenario_files() -> dict[str, Any]:
    """Scenario name -> its file (a path or a package resource); a user's file shadows a shipped one."""
    found: dict[str, Any] = {}
    for folder in scenario_folders():
        if not folder.is_dir():
            continue
        for entry in folder.iterdir():
            stem, dot, suffix = entry.name.rpartition(".")
            if dot and suffix == "toml" and entry.is_file():
                found.setdefault(stem, entry)
    return dict(sorted(found.items()))


def load_scenario(name_or_path) -> Scenario:
    """A scenario by its name (shipped or in ``$LIFEDRAW_SCENARIOS``) or by a path to a .toml file."""
    candidate = Path(str(name_or_path))
    if candidate.suffix == ".toml" and candidate.exists():
        source, name, path = candidate, candidate.stem, candidate
    else:
        files = scenario_files()
        if str(name_or_path) not in files:
            raise ModelError("scenario", f"no scenario {str(name_or_path)!r}; known: {', '.join(files)}")
        source, name = files[str(name_or_path)], str(name_or_path)
        path = source if isinstance(source, Path) else None
    try:
        raw = source.read_bytes()
    except OSError as err:
        raise ModelError("scenario", f"{source.name} could not be read: {err.strerror or err}") from None
    return scenario_from_dict(_parse_toml(raw, source.name), name, path)


def _parse_toml(raw, label: str) -> dict:
    """TOML from UTF-8 bytes or text; other encodings, binary files and runaway nesting are refused."""
    if len(raw) > MAX_SCENARIO_BYTES:
        raise ModelError("scenario", f"{label} is {len(raw) / 2**20:.1f} MiB; a scenario file is at most "
                                     f"{MAX_SCENARIO_BYTES // 2**20} MiB (field data belongs in a CSV file)")
    if isinstance(raw, bytes):
        if raw[:2] in (b"\xff\xfe", b"\xfe\xff"):
            raise ModelError("scenario", f"{label} is UTF-16 text; save it as UTF-8")
        try:
            raw = raw.decode("utf-8")
        except UnicodeDecodeError as err:
            raise ModelError("scenario", f"{label} is not UTF-8 text (byte {err.start}); "
                                         "save it as UTF-8") from None
    if "\x00" in raw:
        raise ModelError("scenario", f"{label} holds a NUL character: a binary file, not TOML")
    try:
        return tomllib.loads(raw.removeprefix("\ufeff"))
    except tomllib.TOMLDecodeError as err:
        raise ModelError("scenario", f"{label} is not valid TOML: {err}") from None
    except RecursionError:
        raise ModelError("scenario", f"{label} nests tables or lists too deeply") from None


def scenario_from_toml(text, name: str = "uploaded") -> Scenario:
    """A scenario from TOML text (or UTF-8 bytes), e.g. an upload."""
    return scenario_from_dict(_parse_toml(text, "the scenario"), name)


def scenario_names() -> list[str]:
    return list(scenario_files())


DEFAULT_SCENARIO = "gearbox-wearout"
