"""The field-data upload area: a stated size limit, checked in the browser before anything is sent
(Panel's FileDropper, FilePond's size validation) and again on arrival; the file travels in chunks.

Above the limit the page says so and points to the command line and the Python
API, which read files of any size from disk. The limit keeps one upload well
inside what a page session should hold in memory and parse in a few seconds;
every chunk stays far below Bokeh's WebSocket message limit (20 MB), whose
breach used to drop the connection without a word.
"""
from __future__ import annotations

import panel as pn

from lifedraw.engine import ModelError

#: The largest upload the page accepts (FilePond's "MB" is 10^6 bytes).
MAX_UPLOAD_MB = 10
MAX_UPLOAD_BYTES = MAX_UPLOAD_MB * 1_000_000
#: Bytes per WebSocket message while a file travels.
CHUNK_BYTES = 1_000_000

UPLOAD_LIMIT_HTML = (
    f'<p class="ld-small ld-muted ld-upload-limit"><b>Up to {MAX_UPLOAD_MB} MB</b> (about 500,000 rows); the '
    "page checks the size before sending. Larger data goes through Python "
    "(<code>lifedraw.engine.field_io.read_failure_csv</code>, then <code>lifedraw.failure_times</code>) or, "
    'for the command line, a scenario file with <code>kind = "failures"</code>.</p>')


def upload_widget() -> pn.widgets.FileDropper:
    """A one-file CSV drop area that refuses a file over the limit in the browser."""
    return pn.widgets.FileDropper(accepted_filetypes=[".csv", "text/csv", "text/plain"], multiple=False,
                                  max_file_size=f"{MAX_UPLOAD_MB}MB", chunk_size=CHUNK_BYTES, layout="compact",
                                  width=340, css_classes=["ld-upload"])


def latest_file(value: dict) -> tuple[str, bytes | str] | None:
    """(file name, content) of the file that arrived last, or None when the area was emptied."""
    if not value:
        return None
    name, data = next(reversed(value.items()))
    return str(name), data


def check_size(data, filename: str) -> None:
    """The second check, on arrival (a page can be scripted past the first one)."""
    size = len(data.encode("utf-8") if isinstance(data, str) else data)
    if size > MAX_UPLOAD_BYTES:
        raise ModelError("upload", f"{filename} has {size / 1e6:.1f} MB, more than the page's limit of "
                                   f"{MAX_UPLOAD_MB} MB; use the command line or the Python API for large data")
