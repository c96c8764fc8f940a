"""User text on its way into HTML, file names and CSS class names: escaped or reduced at the sink.
HTML escaping by MarkupSafe (the escaper Jinja uses): ``Markup`` marks text that is already HTML.

Every title, story, unit, label, parameter name, formula and file name comes from a
file or the page, so it is hostile until proven otherwise. HTML builders in
``plots`` and ``report`` pass each piece through ``text`` (or ``html_table``,
which escapes every cell that is not ``Markup``); names that end up as a file name
or a CSS class go through ``file_stem`` or ``css_token``.
"""
from __future__ import annotations

import re
import unicodedata

from markupsafe import Markup, escape

__all__ = ["Markup", "text", "paragraphs", "one_line", "file_stem", "css_token"]

_UNSAFE_FILE = re.compile(r"[^A-Za-z0-9_.-]+")
_UNSAFE_CSS = re.compile(r"[^A-Za-z0-9_-]+")


def text(value) -> Markup:
    """``value`` as HTML text: ``& < > " '`` escaped; ``Markup`` passes unchanged."""
    return escape("" if value is None else value)


def paragraphs(value) -> Markup:
    """A story as HTML paragraphs: blank lines split them, single new lines become spaces."""
    parts = [text(p.replace("\n", " ").strip()) for p in str(value or "").split("\n\n")]
    return Markup("</p><p>").join(p for p in parts if p)


def one_line(value, limit: int = 200) -> str:
    """Text for a one-line place (a comment line in a file, a header): control characters
    (new lines included) become spaces, and the text is cut at ``limit`` characters."""
    cleaned = "".join(" " if unicodedata.category(c).startswith("C") else c for c in str(value or ""))
    cleaned = " ".join(cleaned.split())
    return cleaned if len(cleaned) <= limit else cleaned[:limit - 1] + "…"


def file_stem(value, default: str = "lifedraw", limit: int = 80) -> str:
    """A file name stem made of letters, digits, ``_ . -`` only (no path, no markup, no leading dot)."""
    stem = _UNSAFE_FILE.sub("-", str(value or "")).strip("-.")[:limit]
    return stem or default


def css_token(value, prefix: str = "ld") -> str:
    """A CSS class name from arbitrary text: unsafe characters become ``-`` (the browser rejects a class
    with a space, and a class must not carry markup)."""
    token = _UNSAFE_CSS.sub("-", str(value or "")).strip("-")
    return f"{prefix}-{token}" if token else prefix
