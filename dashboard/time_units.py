"""How a scenario's time unit reads in labels: "age at failure (hours)", "cost per hour".

Plain text, shared by the pictures and the tables.
"""
from __future__ import annotations


def unit_singular(unit: str) -> str:
    unit = str(unit or "").strip()
    return unit[:-1] if unit.endswith("s") and len(unit) > 2 else unit


def age_label(unit: str) -> str:
    return f"age at failure ({unit})" if unit else "age at failure"
