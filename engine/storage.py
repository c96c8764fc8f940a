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
    """Write the sampler file atomically (a temporary file in the same folder, then a rename),
    so an interrupted save never leaves a truncated file under the name."""
    from .output_files import write_atomically
    return write_atomically(Path(path), lambda fh: _write(sampler, fh), field="path")


def _write(sampler, fh) -> None:
    meta = {"format": FORMAT, "version": VERSION, "method": sampler.method,
            "class": type(sampler).__name__, "tolerance": sampler.tolerance,
            "setup_seconds": sampler.setup_seconds, "reason": sampler.reason,
            "target": sampler.target.spec(), "method_meta": sampler._meta()}
    blob = json.dumps(jsonable(meta), allow_nan=False).encode("utf-8")
    arrays = {f"table.{k}": np.ascontiguousarray(v) for k, v in sampler._tables().items()}
    arrays[META_KEY] = np.frombuffer(blob, dtype=np.uint8)
    np.savez(fh, **arrays)


# Limits checked from the zip directory before anything is decompressed: a sampler's
# tables are a few MB at most (the largest, numerical inversion at tolerance 1e-14,
# is about 2 MB), so these leave ample room and still stop a zip bomb.
MAX_TABLE_BYTES = 512 * 2**20      # all tables together, uncompressed
MAX_META_BYTES = 4 * 2**20         # the JSON metadata
MAX_MEMBERS = 4096
MAX_JSON_DEPTH = 64


def _check_archive(source) -> None:
    """Refuse a file whose zip directory announces too much data, before reading any of it."""
    import zipfile

    try:
        with zipfile.ZipFile(source) as zf:
            infos = zf.infolist()
    except zipfile.BadZipFile as err:
        raise ModelError("path", f"{_name(source)} could not be read as a sampler file ({err})") from None
    finally:
        if hasattr(source, "seek"):
            source.seek(0)
    if len(infos) > MAX_MEMBERS:
        raise ModelError("path", f"{_name(source)} holds {len(infos)} entries, more than a sampler has "
                                 f"(limit {MAX_MEMBERS})")
    total = 0
    for info in infos:
        if info.filename == META_KEY + ".npy":
            if info.file_size > MAX_META_BYTES:
                raise ModelError("path", f"{_name(source)}: its metadata announces {info.file_size} bytes "
                                         f"(limit {MAX_META_BYTES})")
        total += info.file_size
    if total > MAX_TABLE_BYTES:
        raise ModelError("path", f"{_name(source)} announces {total / 2**20:.0f} MiB of tables when "
                                 f"unpacked, more than any sampler needs (limit {MAX_TABLE_BYTES // 2**20} MiB)")


def _name(source) -> str:
    return str(source) if isinstance(source, Path) else "the sampler data"


def _depth(value, limit: int) -> int:
    """Nesting depth of parsed JSON, stopping at ``limit`` (walked without recursion)."""
    stack, deepest = [(value, 1)], 0
    while stack:
        item, depth = stack.pop()
        deepest = max(deepest, depth)
        if deepest > limit:
            return deepest
        if isinstance(item, dict):
            stack.extend((v, depth + 1) for v in item.values())
        elif isinstance(item, list):
            stack.extend((v, depth + 1) for v in item)
    return deepest


def load_sampler(path):
    """Rebuild a sampler saved with ``sampler.save(path)``.

    The file is hostile input: sizes are checked from the zip directory before any
    decompression, the metadata's nesting is bounded, and every table is checked
    against the metadata by the method's ``_restore`` (``engine.table_checks``).
    """
    from .specs import target_from_spec

    path = path if hasattr(path, "read") else Path(path)
    try:
        _check_archive(path)
        with np.load(path, allow_pickle=False) as archive:
            if META_KEY not in archive.files:
                raise ModelError("path", f"{path} is not a lifedraw sampler file (no {META_KEY})")
            raw = archive[META_KEY]
            if raw.dtype != np.uint8 or raw.ndim != 1:
                raise ModelError("path", f"{path}: its metadata is not UTF-8 text")
            meta = json.loads(bytes(raw).decode("utf-8"))
            if _depth(meta, MAX_JSON_DEPTH) > MAX_JSON_DEPTH:
                raise ModelError("path", f"{path}: its metadata nests deeper than {MAX_JSON_DEPTH} levels")
            meta = _from_json(meta)
            tables = {k[len("table."):]: archive[k] for k in archive.files if k.startswith("table.")}
    except FileNotFoundError:
        raise ModelError("path", f"{path} does not exist") from None
    except ModelError:
        raise
    except RecursionError:
        raise ModelError("path", f"{path}: its metadata nests too deeply to read") from None
    except (OSError, ValueError, EOFError, KeyError, TypeError, MemoryError) as err:
        raise ModelError("path", f"{path} could not be read as a sampler file "
                                 f"({type(err).__name__}: {str(err)[:200]})") from None
    if not isinstance(meta, dict):
        raise ModelError("path", f"{path}: its metadata is not a JSON object")
    if meta.get("format") != FORMAT or meta.get("version") != VERSION:
        raise ModelError("path", f"{path} has format {str(meta.get('format'))[:40]!r} version "
                                 f"{str(meta.get('version'))[:20]}; this lifedraw reads {FORMAT!r} version {VERSION}")
    try:
        target = target_from_spec(meta["target"], "target")
        tolerance = float(meta["tolerance"])
        setup_seconds = float(meta.get("setup_seconds", 0.0))
        return restore_sampler(str(meta["class"]), target, tolerance, meta["method_meta"], tables,
                               setup_seconds=setup_seconds if math.isfinite(setup_seconds) else 0.0,
                               reason=str(meta.get("reason", "")))
    except ModelError as err:
        if err.field == "path":
            raise
        raise ModelError("path", f"{path}: the model it describes is invalid ({err})") from None
    except (KeyError, TypeError, ValueError, IndexError, AttributeError, OverflowError, RecursionError) as err:
        # Last line of defence: a metadata shape no check above foresaw.
        raise ModelError("path", f"{path}: its metadata is malformed ({type(err).__name__}: "
                                 f"{str(err)[:200]})") from None


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
