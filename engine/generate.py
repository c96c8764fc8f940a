"""Generation at scale: n lifetimes as a lazy Dask array of chunks, chunk i drawn from its own
stream, on local threads or a Dask cluster, optionally written as resumable .npy shards.

Streams follow numpy's parallel-generation model (NEP 19; numpy.random "Parallel random
number generation"): chunk i uses SeedSequence(seed, spawn_key=(i,)), so the numbers depend on
(sampler, seed, chunk, n) only, never on the scheduler, the worker count or the order of work.
"""
from __future__ import annotations

import contextlib
import hashlib
import io
import json
import math
import os
import pickle
import sys
import tempfile
import threading
import time
import uuid
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable

import numpy as np

from .errors import ModelError, memory_limit_values
from .methods.base import Sampler
from .task_windows import run_on_cluster, run_on_threads
from .target import Target

DEFAULT_CHUNK = 10**7
MANIFEST = "manifest.json"
SHARD_FORMAT = "lifedraw-shards"
# Version 2 records a sha256 checksum per shard in the manifest.
SHARD_VERSION = 2
# The manifest's checksums are rewritten at most this often while shards finish (and at the end).
CHECKSUM_FLUSH_SECONDS = 2.0
# Beyond this many chunks the task graph itself becomes the bottleneck; bigger chunks are the answer.
MAX_CHUNKS = 1_000_000
# Saved-sampler fields that vary between two set-ups of the same model and do not change a draw.
_VOLATILE_META = {"setup_seconds", "reason"}

Progress = Callable[[int, int, int], None]


# ---- streams ----------------------------------------------------------------------------------

def chunk_rng(seed: int, index: int) -> np.random.Generator:
    """The generator of chunk ``index``: default_rng(SeedSequence(seed, spawn_key=(index,)))."""
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(index,)))


def chunk_sizes(n: int, chunk: int) -> tuple[int, ...]:
    full, last = divmod(n, chunk)
    return (chunk,) * full + ((last,) if last else ())


# ---- samplers as bytes (pickle cannot carry formula targets' compiled functions) --------------

def sampler_to_bytes(sampler: Sampler) -> bytes:
    """The sampler's saved file (engine.storage format) as bytes."""
    from .storage import save_sampler
    with tempfile.TemporaryDirectory(prefix="lifedraw-") as tmp:
        path = Path(tmp) / "sampler.npz"
        save_sampler(sampler, path)
        return path.read_bytes()


def sampler_from_bytes(blob: bytes) -> Sampler:
    """Rebuild a sampler from ``sampler_to_bytes`` output (no set-up is redone)."""
    from .storage import load_sampler
    with tempfile.TemporaryDirectory(prefix="lifedraw-") as tmp:
        path = Path(tmp) / "sampler.npz"
        path.write_bytes(blob)
        return load_sampler(path)


def sampler_fingerprint(obj) -> str:
    """sha256 of what decides the draws: the saved sampler's metadata and tables.

    Timing and the "why this method" sentence are left out, so two set-ups of the same
    model give the same fingerprint. A system's fingerprint combines its structure and
    its parts' fingerprints.
    """
    if isinstance(obj, Sampler):
        return _blob_fingerprint(sampler_to_bytes(obj))
    fingerprint = getattr(obj, "fingerprint", None)
    if callable(fingerprint):
        return fingerprint()
    raise ModelError("sampler", f"must be a sampler or a system, got {type(obj).__name__}")


def _blob_fingerprint(blob: bytes) -> str:
    from .storage import META_KEY
    digest = hashlib.sha256()
    with np.load(io.BytesIO(blob), allow_pickle=False) as archive:
        meta = json.loads(bytes(archive[META_KEY]).decode("utf-8"))
        digest.update(json.dumps(_without_volatile(meta), sort_keys=True).encode("utf-8"))
        for name in sorted(archive.files):
            if name == META_KEY:
                continue
            table = np.ascontiguousarray(archive[name])
            digest.update(f"{name}|{table.dtype.str}|{table.shape}|".encode("utf-8"))
            digest.update(table.tobytes())
    return digest.hexdigest()


def _without_volatile(value):
    if isinstance(value, dict):
        return {k: _without_volatile(v) for k, v in value.items() if k not in _VOLATILE_META}
    if isinstance(value, list):
        return [_without_volatile(v) for v in value]
    return value


class ShippedSampler:
    """A sampler or system packed once as bytes, for every chunk task to reference.

    Each chunk draws from a working copy of the unpacked object (unpacked once per
    process), so a chunk's numbers never depend on what ran before it in that process.
    """

    def __init__(self, payload: bytes, kind: str, fingerprint: str, bounds=(-math.inf, math.inf)):
        self.payload, self.kind, self.fingerprint = payload, kind, fingerprint
        self.bounds = (float(bounds[0]), float(bounds[1]))
        self._lock = threading.Lock()
        self._base = None

    @classmethod
    def of(cls, obj) -> "ShippedSampler":
        if isinstance(obj, Sampler):
            blob = sampler_to_bytes(obj)
            return cls(blob, "sampler", _blob_fingerprint(blob), obj.target.support)
        # Systems pickle through their components' saved files (engine.systems); lifetimes are >= 0.
        return cls(pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL), "system", obj.fingerprint(),
                   (0.0, math.inf))

    def fresh(self):
        with self._lock:
            if self._base is None:
                self._base = (sampler_from_bytes(self.payload) if self.kind == "sampler"
                              else pickle.loads(self.payload))
        # Shares the unpacked tables, with its own counters and working state: microseconds,
        # where a deep copy rebuilt the model from its file (milliseconds under the GIL).
        return self._base.working_copy()

    def __reduce__(self):
        return (ShippedSampler, (self.payload, self.kind, self.fingerprint, self.bounds))

    def __dask_tokenize__(self):
        return ("lifedraw-sampler", self.fingerprint)


def _draw_chunk(shipped: ShippedSampler, seed: int, index: int, size: int) -> np.ndarray:
    return shipped.fresh().sample(size, chunk_rng(seed, index))


# ---- validation ---------------------------------------------------------------------------------

def whole_number(field: str, value, minimum: int) -> int:
    if isinstance(value, bool):
        raise ModelError(field, f"must be a whole number, got {value!r}")
    if isinstance(value, (int, np.integer)):
        number = int(value)
    else:
        try:
            as_float = float(str(value).replace("_", "")) if isinstance(value, str) else float(value)
        except (TypeError, ValueError):
            raise ModelError(field, f"must be a whole number, got {value!r}") from None
        if not math.isfinite(as_float) or as_float != math.floor(as_float):
            raise ModelError(field, f"must be a whole number, got {value!r}")
        number = int(as_float)
    if number < minimum:
        raise ModelError(field, f"must be >= {minimum}, got {number}")
    return number


def as_drawable(sampler):
    from .systems import System
    if isinstance(sampler, Target):
        from .sampling import fit
        return fit(sampler, "auto")
    if isinstance(sampler, (Sampler, System)):
        return sampler
    raise ModelError("sampler", f"must be a sampler (engine.fit), a system or a Target, got {type(sampler).__name__}")


def workers_of(client) -> dict:
    """Every worker's info (address -> nthreads, memory_limit, ...)."""
    try:
        return client.scheduler_info(n_workers=-1)["workers"]
    except TypeError:  # distributed before 2025 lists every worker by default
        return client.scheduler_info()["workers"]


def cluster_threads(client, workers: dict | None = None) -> int:
    """How many tasks a cluster runs at once: the sum of its workers' threads."""
    return sum(int(w.get("nthreads") or 1) for w in (workers or workers_of(client)).values())


def check_client(client):
    if client is None:
        return None
    if not (hasattr(client, "submit") and hasattr(client, "scatter") and hasattr(client, "scheduler_info")):
        raise ModelError("client", f"must be a dask.distributed.Client or None, got {type(client).__name__}")
    try:
        workers = workers_of(client)
    except Exception as err:  # a closed or lost client: say so rather than hang
        raise ModelError("client", f"cannot reach its scheduler ({err})") from None
    if not workers:
        raise ModelError("client", "its cluster has no workers; start some or use --workers K")
    return workers


def _check_chunk(chunk: int, n: int, threads: int, workers: dict | None) -> None:
    """A chunk (and the temporaries of drawing it) must fit, times the chunks in flight at once."""
    per = min(chunk, n)
    limit = memory_limit_values() // max(threads, 1)
    if per > limit:
        raise ModelError("chunk", f"{per:.3g} draws per chunk with {threads} chunks in flight need "
                                  f"{per * 8 * 3 * threads / 2**30:.1f} GiB, more than fits in memory here; "
                                  f"use a chunk of at most {limit:.3g}")
    for address, info in (workers or {}).items():
        mem, nthreads = info.get("memory_limit") or 0, max(int(info.get("nthreads") or 1), 1)
        if mem and per * 8 * 3 * nthreads > mem:
            raise ModelError("chunk", f"{per:.3g} draws per chunk need {per * 8 * 3 * nthreads / 2**30:.1f} GiB "
                                      f"on worker {address}, above its memory limit of {mem / 2**30:.1f} GiB; "
                                      f"use a chunk of at most {mem // (8 * 3 * nthreads):.3g}")


def local_threads() -> int:
    import dask
    return int(dask.config.get("num_workers", None) or os.cpu_count() or 1)


# ---- the public verbs -------------------------------------------------------------------------

def generate(sampler, n, chunk=DEFAULT_CHUNK, seed=0, client=None, out=None,
             progress: Progress | None = None):
    """``n`` lifetimes as a lazy dask array; chunk i = sampler.sample(size_i, chunk_rng(seed, i)).

    - ``sampler``: a sampler (``engine.fit``), a system (``engine.series`` ...) or a Target
      (fitted with "auto"). It is packed once (its saved file) and every chunk task
      references that one packed copy.
    - ``client``: a ``dask.distributed.Client``; the packed sampler is scattered to every
      worker and the array is bound to that cluster. ``None``: the array runs on whatever
      scheduler computes it (local threads unless a distributed client is the default).
    - ``out``: a folder. The chunks are written there now, one ``draws-<i>.npy`` per chunk
      plus ``manifest.json``, with at most a few chunks in flight; a rerun with the same
      settings skips finished shards, and a folder from any other run is refused. The
      returned array then reads the shards.
    - ``progress(done_chunks, total_chunks, draws_this_run)`` is called as shards finish.
    """
    import dask
    import dask.array as da
    from dask.highlevelgraph import HighLevelGraph

    n = whole_number("n", n, 1)
    chunk = whole_number("chunk", chunk, 1)
    seed = whole_number("seed", seed, 0)
    sizes = chunk_sizes(n, chunk)
    if len(sizes) > MAX_CHUNKS:
        raise ModelError("chunk", f"{n:.3g} draws in chunks of {chunk:.3g} make {len(sizes):.3g} chunks; "
                                  f"use chunks of at least {math.ceil(n / MAX_CHUNKS):.3g}")
    workers = check_client(client)
    # Locally every thread holds a chunk; on a cluster each worker's own limit is checked.
    _check_chunk(chunk, n, local_threads() if client is None else 1, workers)
    drawable = as_drawable(sampler)
    shipped = ShippedSampler.of(drawable)

    if out is not None:
        return _write_shards(drawable, shipped, n, chunk, seed, sizes, Path(out), client, progress)

    if client is not None:
        source, dependencies = client.scatter(shipped, broadcast=True, hash=False), []
    else:
        node = dask.delayed(shipped, pure=True)
        source, dependencies = node.key, [node]
    name = "lifedraw-draws-" + dask.base.tokenize(shipped.fingerprint, n, chunk, seed)
    graph = {(name, i): (_draw_chunk, source, seed, i, size) for i, size in enumerate(sizes)}
    return da.Array(HighLevelGraph.from_collections(name, graph, dependencies=dependencies),
                    name, chunks=(sizes,), dtype=np.float64)


def open_shards(out):
    """The draws of a finished ``out`` folder as a lazy dask array (one chunk per shard).

    Every shard must be present, complete and recorded with its checksum in the manifest;
    each shard's checksum (and that its values are finite and inside the model's support)
    is verified when its chunk is read, so a damaged or swapped shard stops the computation
    with a ModelError naming it instead of passing wrong numbers on.
    """
    import dask
    import dask.array as da

    folder = Path(out)
    manifest = _read_manifest(folder)
    if manifest is None:
        raise ModelError("out", f"{folder} has no {MANIFEST}; it is not a lifedraw shard folder")
    sizes = chunk_sizes(int(manifest["n"]), int(manifest["chunk"]))
    checksums = manifest.get("checksums", {})
    missing = [i for i, size in enumerate(sizes)
               if str(i) not in checksums or not _shard_ok(_shard_path(folder, i, len(sizes)), size)]
    if missing:
        raise ModelError("out", f"{len(missing)} of {len(sizes)} shards in {folder} are missing, incomplete or "
                                f"not recorded as finished (first: {_shard_path(folder, missing[0], len(sizes)).name}); "
                                "run generate again with the same settings to finish them")
    bounds = tuple(manifest.get("bounds", (-math.inf, math.inf)))
    name = "lifedraw-shards-" + dask.base.tokenize(manifest["sampler"]["fingerprint"], manifest["n"],
                                                   manifest["chunk"], manifest["seed"], str(folder.resolve()),
                                                   checksums)
    graph = {(name, i): (load_shard, str(_shard_path(folder, i, len(sizes))), checksums[str(i)], bounds)
             for i in range(len(sizes))}
    return da.Array(graph, name, chunks=(sizes,), dtype=np.float64)


def read_manifest(out) -> dict:
    """The manifest of a shard folder (seed, chunking, n, sampler fingerprint, model, versions)."""
    manifest = _read_manifest(Path(out))
    if manifest is None:
        raise ModelError("out", f"{out} has no {MANIFEST}")
    return manifest


# ---- shards -------------------------------------------------------------------------------------

def _index_width(total: int) -> int:
    return max(6, len(str(total - 1)))


def _shard_path(folder: Path, index: int, total: int) -> Path:
    return folder / f"draws-{index:0{_index_width(total)}d}.npy"


def _shard_ok(path: Path, size: int) -> bool:
    """A finished shard: a complete float64 .npy of the right length (the header and file size agree)."""
    try:
        array = np.load(path, mmap_mode="r", allow_pickle=False)
    except (OSError, ValueError):
        return False
    ok = array.shape == (size,) and array.dtype == np.float64
    del array
    return ok


def shard_digest(draws: np.ndarray) -> str:
    """sha256 of a shard's float64 values (little-endian bytes), as recorded in the manifest."""
    data = np.ascontiguousarray(draws, dtype="<f8")
    return hashlib.sha256(memoryview(data).cast("B")).hexdigest()


def check_draws(draws: np.ndarray, bounds, where: str) -> None:
    """Refuse NaN, infinite or out-of-support values, naming the shard or chunk."""
    lo, hi = bounds
    bad = ~np.isfinite(draws) | (draws < lo) | (draws > hi)
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        raise ModelError("out", f"{where} holds {float(draws[i])!r} at position {i}, outside the model's support "
                                f"[{lo:g}, {hi:g}]; it is damaged (remove it and run generate again)")


def load_shard(path: str, digest: str | None = None, bounds=(-math.inf, math.inf)) -> np.ndarray:
    """One shard's draws, verified against its recorded checksum and the model's support."""
    name = Path(path).name
    try:
        draws = np.load(path, allow_pickle=False)
    except (OSError, ValueError) as err:
        raise ModelError("out", f"shard {name} could not be read ({err})") from None
    if digest is not None and shard_digest(draws) != digest:
        raise ModelError("out", f"shard {name} does not match the checksum recorded in {MANIFEST}: it was "
                                "changed or copied from another run; run generate again with the same "
                                "settings to rebuild it")
    check_draws(draws, bounds, f"shard {name}")
    return draws


def _write_shard(shipped: ShippedSampler, seed: int, index: int, size: int, path: str) -> dict:
    """Draw chunk ``index`` and write it under a temporary name, then rename it into place:
    a shard under its final name is always complete."""
    start = time.perf_counter()
    draws = _draw_chunk(shipped, seed, index, size)
    final = Path(path)
    check_draws(draws, shipped.bounds, f"chunk {index} (for {final.name})")
    digest = shard_digest(draws)
    temp = final.with_name(f".{final.name}.{uuid.uuid4().hex}.tmp")
    try:
        with open(temp, "wb") as fh:
            np.save(fh, draws, allow_pickle=False)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(temp, final)
    except OSError as err:
        with contextlib.suppress(OSError):
            temp.unlink()
        raise ModelError("out", f"could not write {final}: {err}") from None
    return {"index": index, "size": size, "seconds": time.perf_counter() - start, "sha256": digest}


def _versions() -> dict:
    from importlib import metadata
    out = {"python": sys.version.split()[0]}
    for package in ("lifedraw", "numpy", "dask", "distributed", "scipy"):
        try:
            out[package] = metadata.version(package)
        except metadata.PackageNotFoundError:
            out[package] = "not installed"
    return out


def _manifest(drawable, shipped: ShippedSampler, n: int, chunk: int, seed: int, sizes) -> dict:
    from .storage import jsonable
    if isinstance(drawable, Sampler):
        model = {"method": drawable.method, "class": type(drawable).__name__,
                 "model": drawable.target.spec(), "description": drawable.target.describe()}
    else:
        model = {"method": "system", "class": type(drawable).__name__,
                 "model": drawable.spec(), "description": drawable.describe()}
    return jsonable({
        "format": SHARD_FORMAT, "version": SHARD_VERSION,
        "n": n, "chunk": chunk, "chunks": len(sizes), "seed": seed,
        "stream": "chunk i: numpy.random.default_rng(numpy.random.SeedSequence(seed, spawn_key=(i,)))",
        "shards": f"draws-<index>.npy, index zero-padded to {_index_width(len(sizes))} digits",
        "dtype": "float64",
        "sampler": {"fingerprint": shipped.fingerprint, "kind": shipped.kind, **model},
        "bounds": list(shipped.bounds),
        "versions": _versions(),
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        # shard index -> sha256 of its values, filled in as shards finish.
        "checksums": {},
    })


def _read_manifest(folder: Path) -> dict | None:
    path = folder / MANIFEST
    if not path.exists():
        return None
    try:
        if path.stat().st_size > 64 * 2**20:
            raise ValueError("larger than any manifest (64 MiB)")
        manifest = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError, RecursionError) as err:
        raise ModelError("out", f"{path} could not be read ({type(err).__name__}: {str(err)[:200]})") from None
    _check_manifest(manifest, path)
    return manifest


def _check_manifest(manifest, path) -> None:
    """The fields every reader relies on, with their types; anything else is a damaged manifest."""
    def bad(reason):
        raise ModelError("out", f"{path} is malformed: {reason}; it was damaged or not written by lifedraw")

    if not isinstance(manifest, dict):
        bad("not a JSON object")
    if manifest.get("format") != SHARD_FORMAT:
        bad(f"format {str(manifest.get('format'))[:40]!r}")
    if manifest.get("version") != SHARD_VERSION:
        # Only the version is read here; _differences names it against this run's.
        return
    for key, low in (("n", 1), ("chunk", 1), ("seed", 0), ("chunks", 1)):
        value = manifest.get(key)
        if isinstance(value, bool) or not isinstance(value, int) or value < low:
            bad(f"{key} is {str(value)[:40]!r}")
    if manifest["chunks"] != math.ceil(manifest["n"] / manifest["chunk"]) or manifest["chunks"] > MAX_CHUNKS:
        bad("n, chunk and chunks disagree")
    sampler = manifest.get("sampler")
    if not isinstance(sampler, dict) or not isinstance(sampler.get("fingerprint"), str):
        bad("no sampler fingerprint")
    checksums = manifest.get("checksums")
    if not isinstance(checksums, dict) or not all(
            isinstance(v, str) and len(v) == 64 and isinstance(k, str) and k.isdigit() for k, v in checksums.items()):
        bad("the checksums are not a table of shard index -> sha256")
    bounds = manifest.get("bounds")
    if (not isinstance(bounds, list) or len(bounds) != 2
            or not all(isinstance(b, (int, float)) or isinstance(b, dict) for b in bounds)):
        bad("bounds is not [low, high]")
    manifest["bounds"] = [float(b["float"]) if isinstance(b, dict) else float(b) for b in bounds]


def _write_manifest(folder: Path, manifest: dict) -> None:
    """Replace the manifest atomically (temporary file in the folder, then rename)."""
    from .storage import jsonable
    try:
        temp = folder / f".{MANIFEST}.{uuid.uuid4().hex}.tmp"
        temp.write_text(json.dumps(jsonable(manifest), indent=2, allow_nan=False), encoding="utf-8")
        os.replace(temp, folder / MANIFEST)
    except OSError as err:
        raise ModelError("out", f"could not write {folder / MANIFEST}: {err}") from None


def _differences(old: dict, new: dict) -> list[str]:
    """What makes an existing folder's shards different numbers from this run's."""
    checks = [("format", lambda m: (m.get("format"), m.get("version"))),
              ("sampler", lambda m: m.get("sampler", {}).get("fingerprint")),
              ("seed", lambda m: m.get("seed")),
              ("chunk size", lambda m: m.get("chunk")),
              ("n", lambda m: m.get("n")),
              ("numpy version (its generators' streams may change between versions)",
               lambda m: m.get("versions", {}).get("numpy"))]
    out = []
    for label, get in checks:
        if get(old) != get(new):
            shown_old, shown_new = get(old), get(new)
            if label == "sampler":
                shown_old, shown_new = f"fingerprint {str(shown_old)[:12]}", f"fingerprint {str(shown_new)[:12]}"
            out.append(f"{label}: {shown_new} here, {shown_old} in the folder")
    return out


def _prepare_folder(folder: Path, manifest: dict) -> dict:
    """The folder's manifest: the existing one when it describes this run, else a new one."""
    if folder.exists() and not folder.is_dir():
        raise ModelError("out", f"{folder} is a file, not a folder")
    old = _read_manifest(folder)
    if old is not None:
        differences = _differences(old, manifest)
        if differences:
            raise ModelError("out", f"{folder} holds shards of another run ({'; '.join(differences)}); "
                                    "mixing them would mix different numbers; choose a new folder")
        manifest = old
    else:
        if folder.exists() and any(folder.iterdir()):
            raise ModelError("out", f"{folder} is not empty and has no {MANIFEST}, so it is not a lifedraw "
                                    "shard folder; choose a new or empty folder")
        try:
            folder.mkdir(parents=True, exist_ok=True)
        except OSError as err:
            raise ModelError("out", f"could not create {folder}: {err}") from None
        _write_manifest(folder, manifest)
        manifest = _read_manifest(folder)        # as every later reader sees it
    # Temporary shards left by an interrupted run are never complete: drop them.
    for stale in folder.glob(".draws-*.tmp"):
        with contextlib.suppress(OSError):
            stale.unlink()
    return manifest


def _shard_verified(path: Path, size: int, digest: str | None, bounds) -> bool:
    """A shard that can be kept on resume: complete, with a recorded checksum that matches.
    A shard finished after the manifest's last update (no checksum yet) is redrawn."""
    if digest is None or not _shard_ok(path, size):
        return False
    try:
        load_shard(str(path), digest, bounds)
    except ModelError:
        return False
    return True


def _write_shards(drawable, shipped, n, chunk, seed, sizes, folder: Path, client, progress):
    manifest = _prepare_folder(folder, _manifest(drawable, shipped, n, chunk, seed, sizes))
    total = len(sizes)
    checksums = manifest["checksums"]
    bounds = tuple(manifest["bounds"])
    # Resume: keep only shards whose values match their recorded checksum; a damaged,
    # swapped or unrecorded shard is drawn again (its numbers are fixed by seed and index).
    todo = [(i, size, str(_shard_path(folder, i, total))) for i, size in enumerate(sizes)
            if not _shard_verified(_shard_path(folder, i, total), size, checksums.get(str(i)), bounds)]
    for i, _, _ in todo:
        checksums.pop(str(i), None)
    state = {"done": total - len(todo), "drawn": 0, "flushed": time.monotonic(), "dirty": bool(todo)}

    def finished(result):
        checksums[str(result["index"])] = result["sha256"]
        state["done"] += 1
        state["drawn"] += result["size"]
        if time.monotonic() - state["flushed"] > CHECKSUM_FLUSH_SECONDS:
            _write_manifest(folder, manifest)
            state["flushed"] = time.monotonic()
        if progress is not None:
            progress(state["done"], total, state["drawn"])

    if progress is not None:
        progress(state["done"], total, 0)
    try:
        if todo:
            if client is None:
                run_on_threads(_write_shard, shipped, todo, lambda task: (seed, *task), finished,
                               local_threads(), "generate")
            else:
                run_on_cluster(client, _write_shard, shipped, todo, lambda task: (seed, *task), finished,
                               cluster_threads(client), "shard")
    finally:
        # Also on an interruption: every shard finished so far keeps its checksum.
        if state["dirty"]:
            _write_manifest(folder, manifest)
    try:
        return open_shards(folder)
    except ModelError as err:
        if client is None:
            raise
        raise ModelError("out", f"{err.reason}. The workers wrote the shards where this process cannot "
                                "see them: with a cluster, --out must be a folder shared by every "
                                "worker and this machine") from None


# ---- clusters -----------------------------------------------------------------------------------

def connect(address: str, timeout: float = 10.0, set_as_default: bool = True):
    """A Client on the Dask scheduler at ``address`` (tcp://HOST:PORT), or a ModelError
    naming "scheduler" if it cannot be reached within ``timeout`` seconds."""
    from distributed import Client

    text = str(address).strip()
    if "://" not in text:
        text = "tcp://" + text
    try:
        return Client(text, timeout=timeout, set_as_default=set_as_default)
    except ValueError as err:
        raise ModelError("scheduler", f"{address!r} is not a scheduler address like tcp://HOST:PORT ({err})") from None
    except (OSError, TimeoutError) as err:
        raise ModelError("scheduler", f"could not connect to the Dask scheduler at {text} within "
                                      f"{timeout:g} s ({type(err).__name__}: {err})") from None


@contextlib.contextmanager
def dask_client(scheduler: str | None = None, workers: int | None = None, timeout: float = 10.0):
    """A Client for ``scheduler`` (an address), or on a new local cluster of ``workers``
    single-threaded processes on 127.0.0.1, or None (local threads); closed on exit.
    Inside the block the client is Dask's default, so computing a generated array runs there."""
    if scheduler and workers:
        raise ModelError("workers", "give either a scheduler address or a number of local workers, not both")
    if scheduler:
        client = connect(scheduler, timeout)
        try:
            yield client
        finally:
            client.close()
        return
    if workers is None:
        yield None
        return
    workers = whole_number("workers", workers, 1)
    import logging

    import dask
    from distributed import Client, LocalCluster
    # Dask starts workers with MALLOC_TRIM_THRESHOLD_=64 KiB, which also fixes glibc's mmap
    # threshold at 128 KiB: every 512 KiB temporary of a vectorised batch is then mapped and
    # unmapped, and the page faults cost more than the drawing (measured 2-3x slower). Heap
    # temporaries up to 4 MiB are reused instead; chunk-sized arrays are still mapped and
    # returned to the system when freed, so memory stays bounded.
    environ = {**dask.config.get("distributed.nanny.pre-spawn-environ", {}),
               "MALLOC_MMAP_THRESHOLD_": 4 << 20, "MALLOC_TRIM_THRESHOLD_": 16 << 20}
    with dask.config.set({"distributed.nanny.pre-spawn-environ": environ}):
        cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                               dashboard_address=None, silence_logs=logging.ERROR)
    client = Client(cluster)
    try:
        yield client
    finally:
        client.close()
        cluster.close()
