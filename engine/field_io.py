"""Read field data from CSV text: failure times with a suspension flag, or binned counts.
Rows follow RFC 4180 CSV with a header row; every problem is reported by its line number in the file.

Failure times (``read_failure_csv``)
    A header row names the columns, in any order, case-insensitive:

    - the age column: ``time``, ``age``, ``t``, ``life`` or a name starting with
      ``time`` or ``age`` (``time_hours``, ``age (days)``);
    - the flag column (optional; without it every row is a failure): ``suspended``,
      ``suspension``, ``censored`` or ``status``.

    Accepted flag spellings (case-insensitive):

    ====================  =====================================================
    the unit failed        ``0``, ``false``, ``no``, ``n``, ``f``, ``failed``, ``failure``
    a suspension           ``1``, ``true``, ``yes``, ``y``, ``s``, ``suspended``,
                           ``suspension``, ``censored``, ``c``
    ====================  =====================================================

    (``F``/``S`` read as failure/suspension; ``f`` is also the first letter of
    ``false``, which means the same thing here.)

Binned counts (``read_binned_csv``)
    Columns ``lower``, ``upper``, ``count`` (also ``from``/``to``, ``start``/``end``,
    ``failures``/``n``), one row per bin, in increasing order and contiguous: each
    bin starts where the previous one ends.

Blank lines and lines starting with ``#`` are skipped; the delimiter may be a
comma, a semicolon or a tab. Up to ``MAX_REPORTED`` row problems are collected
into one ``FieldDataError`` (a ``ModelError`` whose field names the first bad row).
"""
from __future__ import annotations

import csv
import io
import math
from pathlib import Path

import numpy as np

from .errors import ModelError

MAX_REPORTED = 10

_TIME_NAMES = ("time", "age", "t", "life")
_FLAG_NAMES = ("suspended", "suspension", "censored", "status")
_FAILED = {"0", "false", "no", "n", "f", "failed", "failure"}
_SUSPENDED = {"1", "true", "yes", "y", "s", "suspended", "suspension", "censored", "c"}
_LOWER_NAMES = ("lower", "from", "start")
_UPPER_NAMES = ("upper", "to", "end")
_COUNT_NAMES = ("count", "failures", "n")


class FieldDataError(ModelError):
    """One or more rows of a field-data file are unusable.

    ``problems`` lists ``(line, reason)`` for each bad row found (at most
    ``MAX_REPORTED``); ``field`` is ``"row N"`` for the first of them.
    """

    def __init__(self, problems: list[tuple[int, str]], more: int = 0):
        self.problems = problems
        self.more = more
        first_line, first_reason = problems[0]
        rest = [f"row {line}: {reason}" for line, reason in problems[1:]]
        if more:
            rest.append(f"and {more} more bad row{'s' if more > 1 else ''}")
        reason = "; ".join([first_reason, *rest])
        super().__init__(f"row {first_line}", reason)


class _Problems:
    """Collects row problems and raises them together."""

    def __init__(self):
        self.items: list[tuple[int, str]] = []
        self.more = 0

    def add(self, line: int, reason: str) -> None:
        if len(self.items) < MAX_REPORTED:
            self.items.append((line, reason))
        else:
            self.more += 1

    def raise_if_any(self) -> None:
        if self.items:
            raise FieldDataError(self.items, self.more)


def _text(text_or_path) -> str:
    if isinstance(text_or_path, bytes):
        return text_or_path.decode("utf-8-sig", errors="replace")
    if isinstance(text_or_path, Path):
        return text_or_path.read_text(encoding="utf-8-sig")
    text = str(text_or_path)
    if "\n" not in text and "," not in text and len(text) < 4096:
        path = Path(text)
        if path.is_file():
            return path.read_text(encoding="utf-8-sig")
        raise ModelError("file", f"no such file {text!r}")
    return text.lstrip("\ufeff")


def _rows(text: str) -> tuple[int, list[str], list[tuple[int, list[str]]]]:
    """(header line, header cells, [(line, cells)]) with blank and # lines skipped."""
    lines = text.splitlines()
    numbered = [(i + 1, line) for i, line in enumerate(lines)
                if line.strip() and not line.lstrip().startswith("#")]
    if not numbered:
        raise ModelError("file", "is empty: expected a header row and at least one data row")
    sample = numbered[0][1]
    delimiter = max((",", ";", "\t"), key=sample.count) if any(d in sample for d in ",;\t") else ","
    parsed = []
    for line_no, line in numbered:
        cells = next(csv.reader(io.StringIO(line), delimiter=delimiter), [])
        parsed.append((line_no, [c.strip() for c in cells]))
    header_line, header = parsed[0]
    return header_line, [h.lower() for h in header], parsed[1:]


def _find(header: list[str], names: tuple[str, ...], prefixes: tuple[str, ...] = ()) -> int | None:
    for i, h in enumerate(header):
        if h in names:
            return i
    for i, h in enumerate(header):
        if any(h.startswith(p) for p in prefixes):
            return i
    return None


def _number(cell: str) -> float | None:
    try:
        value = float(cell)
    except ValueError:
        return None
    return value


def _cell(cells: list[str], index: int) -> str | None:
    return cells[index] if index < len(cells) and cells[index] != "" else None


def read_failure_csv(text_or_path) -> tuple[np.ndarray, np.ndarray]:
    """Failure and suspension ages from CSV: ``(times, censored)``, ``censored`` True for a suspension.

    ``text_or_path`` is the file's text (or bytes) or a path. Raises
    ``FieldDataError`` (field ``"row N"``) listing the bad rows, or
    ``ModelError`` (field ``"header"`` / ``"file"``) when the layout is wrong.
    """
    header_line, header, rows = _rows(_text(text_or_path))
    t_col = _find(header, _TIME_NAMES, ("time", "age"))
    if t_col is None:
        raise ModelError("header", f"line {header_line} must name an age column "
                                   f"({', '.join(_TIME_NAMES)}); found: {', '.join(header) or 'nothing'}")
    f_col = _find(header, _FLAG_NAMES)
    if not rows:
        raise ModelError("file", "has a header but no data rows")
    problems = _Problems()
    times, flags = [], []
    for line, cells in rows:
        raw = _cell(cells, t_col)
        if raw is None:
            problems.add(line, f"the {header[t_col]!r} value is missing")
            continue
        t = _number(raw)
        if t is None:
            problems.add(line, f"{header[t_col]} {raw!r} is not a number")
            continue
        if not math.isfinite(t):
            problems.add(line, f"{header[t_col]} {raw!r} is not finite")
            continue
        if t < 0:
            problems.add(line, f"{header[t_col]} {t:g} is negative; ages are >= 0")
            continue
        suspended = False
        if f_col is not None:
            flag = _cell(cells, f_col)
            if flag is None:
                problems.add(line, f"the {header[f_col]!r} flag is missing (use 1/0, true/false, yes/no or F/S)")
                continue
            key = flag.lower()
            if key in _SUSPENDED:
                suspended = True
            elif key not in _FAILED:
                problems.add(line, f"{header[f_col]} flag {flag!r} not understood "
                                   "(use 1/0, true/false, yes/no or F/S)")
                continue
        times.append(t)
        flags.append(suspended)
    problems.raise_if_any()
    censored = np.array(flags, dtype=bool)
    if censored.all():
        raise ModelError("file", f"all {censored.size} rows are suspensions; at least one failure is needed")
    return np.array(times, dtype=float), censored


def read_binned_csv(text_or_path) -> tuple[np.ndarray, np.ndarray]:
    """Binned failure counts from CSV: ``(edges, counts)``, with ``edges`` one longer than ``counts``.

    Bins must be listed in increasing order and be contiguous (each lower end
    equals the previous upper end). Raises ``FieldDataError`` (field ``"row N"``)
    listing the bad rows, or ``ModelError`` for a wrong layout.
    """
    header_line, header, rows = _rows(_text(text_or_path))
    cols = {"lower": _find(header, _LOWER_NAMES), "upper": _find(header, _UPPER_NAMES),
            "count": _find(header, _COUNT_NAMES)}
    missing = [k for k, v in cols.items() if v is None]
    if missing:
        raise ModelError("header", f"line {header_line} must name the columns lower, upper and count; "
                                   f"missing: {', '.join(missing)}")
    if not rows:
        raise ModelError("file", "has a header but no data rows")
    problems = _Problems()
    edges: list[float] = []
    counts: list[float] = []
    prev_upper = None
    for line, cells in rows:
        values = {}
        bad = False
        for key, col in cols.items():
            raw = _cell(cells, col)
            if raw is None:
                problems.add(line, f"the {header[col]!r} value is missing")
                bad = True
                break
            v = _number(raw)
            if v is None or not math.isfinite(v):
                problems.add(line, f"{header[col]} {raw!r} is not a {'finite ' if v is not None else ''}number")
                bad = True
                break
            values[key] = v
        if bad:
            continue
        lo, hi, n = values["lower"], values["upper"], values["count"]
        if lo < 0:
            problems.add(line, f"lower end {lo:g} is negative; ages are >= 0")
        elif hi <= lo:
            problems.add(line, f"upper end {hi:g} is not above the lower end {lo:g}")
        elif n < 0:
            problems.add(line, f"count {n:g} is negative")
        elif prev_upper is not None and not math.isclose(lo, prev_upper, rel_tol=1e-9, abs_tol=0.0):
            what = "gap between bins" if lo > prev_upper else "bins overlap"
            problems.add(line, f"{what}: this bin starts at {lo:g} but the previous one ends at {prev_upper:g}")
        else:
            if not edges:
                edges.append(lo)
            edges.append(hi)
            counts.append(n)
        # Keep checking contiguity against this row even when it was bad, so one
        # mistake is reported once rather than again on the next row.
        prev_upper = hi if hi > lo else prev_upper
    problems.raise_if_any()
    counts_arr = np.array(counts, dtype=float)
    if counts_arr.sum() <= 0:
        raise ModelError("file", "every count is 0; there is nothing to sample")
    return np.array(edges, dtype=float), counts_arr


def sniff_layout(text_or_path) -> str:
    """``"binned"`` if the header names lower/upper/count columns, else ``"failures"``."""
    _, header, _ = _rows(_text(text_or_path))
    if _find(header, _LOWER_NAMES) is not None and _find(header, _UPPER_NAMES) is not None:
        return "binned"
    return "failures"
