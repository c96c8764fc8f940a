"""Checks on the tables and metadata of a loaded sampler file, before any draw uses them.

A sampler file is hostile input (it also ships samplers to Dask workers): each method's
``_restore`` takes every array through ``table(...)`` and every number through ``number(...)``,
which enforce dtype, shape, index range, monotonicity and finiteness, refusing with a
``ModelError`` on the field ``"path"`` that names the table and the rule it breaks.
"""
from __future__ import annotations

import math

import numpy as np

from .errors import ModelError

FIELD = "path"


def _refuse(name: str, reason: str):
    raise ModelError(FIELD, f"the sampler file's {name!r} {reason}; the file is damaged or was not "
                            "written by lifedraw (save the sampler again)")


def table(tables: dict, name: str, *, kind: str = "float", ndim: int = 1, length: int | None = None,
          columns: int | None = None, finite: bool = True, low=None, high=None,
          increasing: bool = False, nondecreasing: bool = False, allow_empty: bool = False) -> np.ndarray:
    """The array ``tables[name]`` as a contiguous float64 / int64 / bool array, or ModelError.

    ``kind``: "float", "int" (integral values) or "bool"; ``low``/``high`` bound every
    value (inclusive); ``finite`` refuses NaN and infinities (floats only; a float table
    that may hold -inf says ``finite=False`` and is still refused NaN).
    """
    if name not in tables:
        _refuse(name, "table is missing")
    raw = tables[name]
    if not isinstance(raw, np.ndarray) or raw.dtype.kind not in "biuf":
        _refuse(name, f"table has the wrong type ({getattr(raw, 'dtype', type(raw).__name__)})")
    if raw.ndim != ndim:
        _refuse(name, f"table has {raw.ndim} dimensions, not {ndim}")
    if length is not None and raw.shape[0] != length:
        _refuse(name, f"table has {raw.shape[0]} rows where {length} belong")
    if columns is not None and (ndim < 2 or raw.shape[1] != columns):
        _refuse(name, f"table has shape {raw.shape}, not (n, {columns})")
    if raw.size == 0 and not allow_empty:
        _refuse(name, "table is empty")
    if kind == "bool":
        if raw.dtype.kind == "f" or not np.all((raw == 0) | (raw == 1)):
            _refuse(name, "table holds values other than true/false")
        return np.ascontiguousarray(raw, dtype=bool)
    if kind == "int":
        if raw.dtype.kind == "f":
            if not np.all(np.isfinite(raw)) or np.any(raw != np.floor(raw)):
                _refuse(name, "table holds values that are not whole numbers")
            if raw.size and np.max(np.abs(raw)) > 2.0 ** 62:
                _refuse(name, "table holds indices far out of range")
        arr = np.ascontiguousarray(raw, dtype=np.int64)
    else:
        arr = np.ascontiguousarray(raw, dtype=np.float64)
        if np.any(np.isnan(arr)):
            _refuse(name, "table holds NaN")
        if finite and not np.all(np.isfinite(arr)):
            _refuse(name, "table holds an infinite value")
    if arr.size:
        if low is not None and np.min(arr) < low:
            _refuse(name, f"table holds {np.min(arr):.6g}, below its least allowed value {low:g}")
        if high is not None and np.max(arr) > high:
            _refuse(name, f"table holds {np.max(arr):.6g}, above its greatest allowed value {high:g}")
        steps = np.diff(arr, axis=0) if arr.shape[0] > 1 else np.zeros(0)
        if increasing and np.any(steps <= 0):
            _refuse(name, "table must increase strictly and does not")
        if nondecreasing and np.any(steps < 0):
            _refuse(name, "table must not decrease and does")
    return arr


def number(meta: dict, key: str, *, low=None, high=None, finite: bool = True, optional: bool = False):
    """``meta[key]`` as a float within [low, high], or ModelError naming the metadata entry."""
    if not isinstance(meta, dict) or key not in meta:
        if optional:
            return None
        _refuse(key, "metadata entry is missing")
    value = meta[key]
    if value is None and optional:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        _refuse(key, f"metadata entry is not a number ({type(value).__name__})")
    try:
        value = float(value)
    except OverflowError:
        _refuse(key, "metadata entry is out of range")
    if math.isnan(value) or (finite and math.isinf(value)):
        _refuse(key, f"metadata entry is {value}")
    if (low is not None and value < low) or (high is not None and value > high):
        _refuse(key, f"metadata entry {value:g} lies outside [{low}, {high}]")
    return value


def choice(meta: dict, key: str, allowed):
    """``meta[key]`` if it is one of ``allowed``, else ModelError."""
    value = meta.get(key) if isinstance(meta, dict) else None
    if not isinstance(value, (str, type(None))) or value not in allowed:
        _refuse(key, f"metadata entry {value!r} is none of {sorted(map(str, allowed))}")
    return value


def mapping(meta: dict, key: str) -> dict:
    """``meta[key]`` if it is a JSON object (a dict), else ModelError."""
    value = meta.get(key) if isinstance(meta, dict) else None
    if not isinstance(value, dict):
        _refuse(key, "metadata entry is not a table of values")
    return value
