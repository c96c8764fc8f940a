"""Bokeh plots packed for a file that opens offline: BokehJS and the plots' documents travel gzip-compressed
as base64 text inside the page, and the browser unpacks them (Compression Streams, ``DecompressionStream``).

BokehJS is 1.3 MB of JavaScript and the documents another few hundred kB of JSON; gzip (RFC 1952) brings
both to about a third, base64 (RFC 4648) adds a third back so they sit in the HTML as plain text. Nothing
is fetched: the bytes come from the page's own text, are unpacked in memory (``Blob.stream``,
``Response.text``), and BokehJS runs as an inline script element before ``Bokeh.embed.embed_items``
draws the plots. A browser without ``DecompressionStream`` keeps every table and text of the page and
shows a note saying why the plots are missing.

Plot data is narrowed before it is packed: float64 columns become float32 when every value is zero,
infinite, NaN or of a magnitude float32 holds (1e-30 to 1e30), which keeps seven significant digits,
far below a pixel or a tooltip's three decimals.
"""
from __future__ import annotations

import base64
import dataclasses
import functools
import gzip
import json

import numpy as np
from bokeh.core.json_encoder import serialize_json
from bokeh.document import Document
from bokeh.embed.util import standalone_docs_json_and_render_items
from bokeh.models import ColumnDataSource
from bokeh.resources import Resources

from .escaping import text

#: Element ids: the status line (unpacking, or why the plots cannot be shown) and the two packed texts.
IDS = {"note": "ld-plots-note", "code": "ld-bokehjs", "docs": "ld-plot-documents"}
#: Magnitudes float32 holds with its full seven digits (its normal range is 1.2e-38 to 3.4e38).
FLOAT32_RANGE = (1e-30, 1e30)

UNPACK_JS = """
(function () {
  const note = document.getElementById("%(note)s");
  const say = (message) => { note.textContent = message; note.className = "ld-plots-note ld-plots-missing"; };
  if (typeof DecompressionStream === "undefined" || typeof Blob === "undefined" || !Blob.prototype.stream) {
    say("The plots cannot be shown in this browser: it cannot unpack the compressed plots (it lacks the "
        + "DecompressionStream of the Compression Streams standard). The text and tables of the report are "
        + "complete; open the file in a current browser to see the plots.");
    return;
  }
  const unpack = async (id) => {
    const b64 = document.getElementById(id).textContent.trim();
    const raw = atob(b64);
    const bytes = new Uint8Array(raw.length);
    for (let i = 0; i < raw.length; i++) bytes[i] = raw.charCodeAt(i);
    const stream = new Blob([bytes]).stream().pipeThrough(new DecompressionStream("gzip"));
    return await new Response(stream).text();
  };
  Promise.all([unpack("%(code)s"), unpack("%(docs)s")]).then(([code, docs]) => {
    const script = document.createElement("script");
    script.textContent = code;
    document.head.appendChild(script);
    const packed = JSON.parse(docs);
    return window.Bokeh.embed.embed_items(packed.docs_json, packed.render_items);
  }).then(() => { note.hidden = true; }).catch((err) => {
    say("The plots could not be unpacked: " + err + ". The text and tables of the report are complete.");
  });
})();
"""

NOTE_CSS = """
.ld-plots-note { color: #6b7280; font-size: 13px; margin: 8px 0; }
.ld-plots-missing { background: #fdecea; border: 1px solid #f5b7b1; border-radius: 6px; padding: 10px 14px;
                    color: #7f1d1d; }
"""


@dataclasses.dataclass(frozen=True)
class PackedPlots:
    """The pieces (HTML text) of a page that shows packed plots: ``divs`` one per model, in order, to place
    anywhere in the body; ``note`` the status line (place it before the first plot); ``tail`` the packed
    bytes and the unpacking script, at the end of the body; ``css`` for the note."""
    divs: list[str]
    note: str
    tail: str
    css: str = NOTE_CSS


def narrow_floats(models) -> int:
    """Store the float64 columns of every ColumnDataSource under ``models`` as float32 where that loses
    nothing visible (see the module's docstring); returns the number of columns narrowed."""
    return narrow_columns(source for model in models for source in model.select({"type": ColumnDataSource}))


def narrow_columns(sources) -> int:
    """``narrow_floats`` for the given ColumnDataSources themselves."""
    narrowed = 0
    lo, hi = FLOAT32_RANGE
    for source in sources:
        for key, column in list(source.data.items()):
            if not (isinstance(column, np.ndarray) and column.dtype == np.float64):
                continue
            size = np.abs(column[np.isfinite(column)])
            if np.all((size == 0) | ((size > lo) & (size < hi))):
                # item by item: assigning a whole dict whose arrays compare equal would be ignored
                source.data[key] = column.astype(np.float32)
                narrowed += 1
    return narrowed


def gzip_base64(payload: bytes) -> str:
    """``payload`` gzip-compressed (level 9, no time stamp, so the same input gives the same text)
    and base64-encoded."""
    return base64.b64encode(gzip.compress(payload, compresslevel=9, mtime=0)).decode("ascii")


def unpack_text(packed: str) -> str:
    """The inverse of ``gzip_base64`` for UTF-8 text (what the page's script does, for tests and tools)."""
    return gzip.decompress(base64.b64decode(packed)).decode("utf-8")


def bokehjs_source() -> str:
    """BokehJS itself (the core bundle only: the report has no widgets or tables of Bokeh's).
    Only the raw code is used: with Panel imported, Bokeh's resource lists also name Panel's
    extension files by relative URL, which a standalone file cannot load."""
    return "\n".join(Resources(mode="inline", components=["bokeh"]).js_raw)


@functools.cache
def packed_bokehjs() -> str:
    """BokehJS packed by ``gzip_base64``: the same for every report of this installation, so packed once
    per process (about 40 ms)."""
    return gzip_base64(bokehjs_source().encode("utf-8"))


def pack_plots(models: list) -> PackedPlots:
    """Put ``models`` (Bokeh roots) into one document and pack it with BokehJS (see the module's docstring)."""
    doc = Document()
    with doc.models.freeze():        # one pass over the model graph for all roots, not one per root
        for model in models:
            doc.add_root(model)
    narrow_columns([model for model in doc.models if isinstance(model, ColumnDataSource)])  # found by that pass
    docs_json, render_items = standalone_docs_json_and_render_items(models)
    docs = serialize_json({"docs_json": docs_json, "render_items": [item.to_json() for item in render_items]},
                          pretty=False)
    roots = render_items[0].roots
    divs = [f'<div id="{text(root.elementid)}" data-root-id="{text(root.id)}" style="display: contents;"></div>'
            for root in roots]
    ids = IDS
    note = (f'<p id="{ids["note"]}" class="ld-plots-note">Unpacking the plots… (they need JavaScript; '
            "the text and tables stand on their own).</p>")
    tail = (f'<script type="application/octet-stream" id="{ids["code"]}" data-encoding="gzip+base64">'
            f'{packed_bokehjs()}</script>\n'
            f'<script type="application/octet-stream" id="{ids["docs"]}" data-encoding="gzip+base64">'
            f'{gzip_base64(docs.encode("utf-8"))}</script>\n'
            f"<script>{UNPACK_JS % ids}</script>")
    return PackedPlots(divs=divs, note=note, tail=tail)


def packed_payloads(page: str) -> dict:
    """The packed texts of a page written with ``pack_plots``, unpacked: ``{"bokehjs": str, "docs": dict}``."""
    def between(ident):
        start = page.index(f'id="{ident}"')
        start = page.index(">", start) + 1
        return page[start:page.index("</script>", start)]
    return {"bokehjs": unpack_text(between(IDS["code"])), "docs": json.loads(unpack_text(between(IDS["docs"])))}
