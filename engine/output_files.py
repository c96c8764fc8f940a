"""Writing output files safely: check the destination before the work, then write to a
temporary file in the same folder and rename it over the destination in one step.

The rename is atomic on POSIX and Windows when both names are on one file system
(``os.replace``; POSIX.1-2017 rename()), so a reader never sees a half-written file
and a failure or kill mid-write leaves any earlier file whole.
"""
from __future__ import annotations

import os
import secrets
from pathlib import Path
from typing import Callable, Union

from .errors import ModelError

Content = Union[bytes, str, Callable]


def check_destination(path, *, force: bool = False, suffixes=None, field: str = "output") -> Path:
    """The destination as a Path, or ModelError: its folder must exist and be writable,
    it must not be a folder, and an existing file is replaced only with ``force``.

    Called before any expensive work, so a bad destination costs nothing.
    """
    try:
        path = Path(os.fspath(path)).expanduser()
    except TypeError:
        raise ModelError(field, f"must be a file name, got {path!r}") from None
    if not str(path) or path.name in ("", ".", ".."):
        raise ModelError(field, f"{str(path)!r} is not a file name")
    if path.is_dir():
        raise ModelError(field, f"{str(path)!r} is a folder; give a file name")
    if suffixes is not None and path.suffix.lower() not in suffixes:
        raise ModelError(field, f"unknown file type {path.suffix!r} for {path.name!r}; use "
                                f"{', '.join(suffixes)}")
    folder = path.parent
    if not folder.exists():
        raise ModelError(field, f"the folder {str(folder)!r} does not exist; create it first")
    if not folder.is_dir():
        raise ModelError(field, f"{str(folder)!r} is not a folder")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise ModelError(field, f"the folder {str(folder)!r} is not writable")
    if path.exists() and not force:
        raise ModelError(field, f"{str(path)!r} already exists; choose another name or pass --force "
                                "to replace it")
    return path


def _new_partial_file(path: Path) -> tuple[int, str]:
    """A new, empty file beside ``path`` (descriptor, name) for the content before the rename.

    Created as a plain ``open`` would create it, with the permissions the user's umask gives (a
    report or shard others may read): ``tempfile.mkstemp`` would make every output private (0600)."""
    for _ in range(100):
        name = str(path.parent / f".{path.name}.{secrets.token_hex(6)}.partial")
        try:
            return os.open(name, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), 0o666), name
        except FileExistsError:
            continue
    raise FileExistsError(f"no free temporary name beside {path.name}")


def write_atomically(path, content: Content, *, field: str = "output") -> Path:
    """Write ``content`` (bytes, text in UTF-8, or a function that writes to a binary
    file object) to ``path`` through a temporary file in the same folder and a rename."""
    path = Path(path)
    fd, temp_name = None, None
    try:
        fd, temp_name = _new_partial_file(path)
        with os.fdopen(fd, "wb") as fh:
            fd = None
            if isinstance(content, str):
                fh.write(content.encode("utf-8"))
            elif isinstance(content, (bytes, bytearray, memoryview)):
                fh.write(content)
            else:
                content(fh)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(temp_name, path)
        temp_name = None
    except OSError as err:
        raise ModelError(field, f"could not write {str(path)!r}: {err.strerror or err}") from None
    finally:
        if fd is not None:
            os.close(fd)
        if temp_name is not None:
            try:
                os.unlink(temp_name)
            except OSError:
                pass
    return path
