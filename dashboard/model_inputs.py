"""Small parsers for what a user types into the model editor and the upload area: name = value
lists, a support, a time unit and mission times, each refusing bad text with ModelError(field, reason)."""
from __future__ import annotations

import math
import re

from lifedraw.engine import ModelError


FORMULA_KINDS = ("density", "hazard", "cdf")


# ---- small parsers for the model editor --------------------------------------------------------

_ASSIGN = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*=\s*(\S.*?)\s*$")


def parse_assignments(text: str) -> dict[str, float]:
    """``"k = 2.5, s = 9000"`` (commas, semicolons or new lines) -> {"k": 2.5, "s": 9000.0}."""
    out: dict[str, float] = {}
    for part in re.split(r"[,;\n]", str(text or "")):
        if not part.strip():
            continue
        m = _ASSIGN.match(part)
        if not m:
            raise ModelError("parameters", f"{part.strip()!r} is not of the form name = number")
        name, raw = m.group(1), m.group(2)
        try:
            value = float(raw)
        except ValueError:
            raise ModelError("parameters", f"{name} = {raw!r}: not a number") from None
        if not math.isfinite(value):
            raise ModelError("parameters", f"{name} must be finite, got {raw}")
        if name in out:
            raise ModelError("parameters", f"{name} is given twice")
        out[name] = value
    return out


def parse_time_unit(text: str) -> str:
    """The time unit of uploaded data: a short word such as hours, days, cycles, km."""
    unit = str(text or "").strip()
    if not unit:
        raise ModelError("time unit", "say in which unit the ages are recorded, e.g. hours, days or cycles")
    if len(unit) > 24 or not re.fullmatch(r"[A-Za-z][A-Za-z0-9 ._/-]*", unit):
        raise ModelError("time unit", f"use a short word of letters (at most 24 characters), got {unit[:30]!r}")
    return unit


def parse_mission_times(text: str) -> list[float]:
    """``"8760, 17520"`` -> [8760.0, 17520.0]: positive ages, at most 10, empty for none."""
    out = []
    for part in re.split(r"[,;\s]+", str(text or "").strip()):
        if not part:
            continue
        try:
            value = float(part)
        except ValueError:
            raise ModelError("mission times", f"{part[:30]!r} is not a number") from None
        if not (math.isfinite(value) and value > 0):
            raise ModelError("mission times", f"each mission time must be a positive age, got {part}")
        out.append(value)
    if len(out) > 10:
        raise ModelError("mission times", f"give at most 10 mission times, got {len(out)}")
    return sorted(set(out))


def parse_support(text: str) -> list:
    """``"0, inf"`` -> [0.0, "inf"] (the scenario file's spelling of an open end)."""
    parts = [p.strip() for p in re.split(r"[,;]", str(text or "")) if p.strip()]
    if len(parts) != 2:
        raise ModelError("support", f"give two ends separated by a comma, e.g. 0, inf; got {text!r}")
    out = []
    for p in parts:
        low = p.lower()
        if low in ("inf", "+inf", "infinity"):
            out.append("inf")
        elif low in ("-inf", "-infinity"):
            out.append("-inf")
        else:
            try:
                out.append(float(p))
            except ValueError:
                raise ModelError("support", f"{p!r} is not a number (use inf for an open end)") from None
    return out
