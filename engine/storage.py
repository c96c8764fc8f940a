"""Saving and loading samplers: one portable file of our own design.

The file is a numpy ``.npz`` archive (a zip of ``.npy`` arrays, readable without
pickle) holding the method's tables plus one entry ``lifedraw.json``: a UTF-8
JSON document with the format version, method, tolerance, the target's spec and
the method's metadata. Loading restores the tables without redoing the set-up.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from .errors import ModelError

FORMAT = "lifedraw-sampler"
VERSION = 1
META_KEY = "lifedraw.json"


def jsonable(value):
    """Plain JSON types, non-finite floats kept as ``{"float": "inf"}`` (read back by the loader)."""
    if isinstance(value, float) and not math.isfinite(value):
        return {"float": repr(value)}
    if isinstance(value, dict):
        return {k: jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, np.generic):
        return jsonable(value.item())
    return value


def _from_json(value):
    if isinstance(value, dict):
        if set(value) == {"float"}:
            return float(value["float"])
        return {k: _from_json(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_from_json(v) for v in value]
    return value


def dumps(sampler) -> bytes:
    """The sampler file's bytes (the same format as ``save``), for shipping or pickling."""
    import io
    buffer = io.BytesIO()
    _write(sampler, buffer)
    return buffer.getvalue()


def loads(blob: bytes):
    """A sampler from ``dumps`` bytes."""
    import io
    return load_sampler(io.BytesIO(blob))


def save_sampler(sampler, path) -> Path:
    path = Path(path)
    with open(path, "wb") as fh:
        _write(sampler, fh)
    return path


def _write(sampler, fh) -> None:
    meta = {"format": FORMAT, "version": VERSION, "method": sampler.method,
            "class": type(sampler).__name__, "tolerance": sampler.tolerance,
            "setup_seconds": sampler.setup_seconds, "reason": sampler.reason,
            "target": sampler.target.spec(), "method_meta": sampler._meta()}
    blob = json.dumps(jsonable(meta), allow_nan=False).encode("utf-8")
    arrays = {f"table.{k}": np.ascontiguousarray(v) for k, v in sampler._tables().items()}
    arrays[META_KEY] = np.frombuffer(blob, dtype=np.uint8)
    np.savez(fh, **arrays)


def load_sampler(path):
    """Rebuild a sampler saved with ``sampler.save(path)``."""
    from .specs import target_from_spec

    path = path if hasattr(path, "read") else Path(path)
    try:
        with np.load(path, allow_pickle=False) as archive:
            if META_KEY not in archive.files:
                raise ModelError("path", f"{path} is not a lifedraw sampler file (no {META_KEY})")
            meta = _from_json(json.loads(bytes(archive[META_KEY]).decode("utf-8")))
            tables = {k[len("table."):]: archive[k] for k in archive.files if k.startswith("table.")}
    except FileNotFoundError:
        raise ModelError("path", f"{path} does not exist") from None
    except (OSError, ValueError) as err:
        if isinstance(err, ModelError):
            raise
        raise ModelError("path", f"{path} could not be read as a sampler file ({err})") from None
    if meta.get("format") != FORMAT or meta.get("version") != VERSION:
        raise ModelError("path", f"{path} has format {meta.get('format')!r} version {meta.get('version')!r}; "
                                 f"this lifedraw reads {FORMAT!r} version {VERSION}")
    target = target_from_spec(meta["target"], "target")
    return restore_sampler(meta["class"], target, meta["tolerance"], meta["method_meta"], tables,
                           setup_seconds=meta["setup_seconds"], reason=meta.get("reason", ""))


def restore_sampler(class_name: str, target, tolerance: float, meta: dict, tables: dict,
                    setup_seconds: float = 0.0, reason: str = ""):
    """Rebuild one sampler object from its saved metadata and tables (no set-up)."""
    from .methods import sampler_class
    from .methods.base import Sampler

    cls = sampler_class(class_name)
    sampler = cls.__new__(cls)
    Sampler.__init__(sampler, target, tolerance)
    sampler.setup_seconds = setup_seconds
    sampler.reason = reason
    sampler._restore(meta, tables)
    return sampler
