"""Packing plots for the standalone report (dashboard.packed_plots): float64 columns narrowed only where
float32 holds them, and the gzip + base64 text that the page unpacks in the browser.

References: IEEE 754 binary32 has a 24-bit significand, so rounding a double to it changes it by at most
2^-24 of its value while it is a normal number (magnitude >= 2^-126, about 1.2e-38); gzip is RFC 1952,
base64 RFC 4648 (alphabet A-Z a-z 0-9 + / and = for padding).
"""
import base64
import gzip
import re

import numpy as np
from bokeh.models import ColumnDataSource
from bokeh.plotting import figure

from lifedraw.dashboard.packed_plots import gzip_base64, narrow_floats, pack_plots, packed_payloads, unpack_text


def plot_with(**columns):
    fig = figure(width=200, height=200)
    source = ColumnDataSource(data=columns)
    fig.scatter("x", "y", source=source)
    return fig, source


def test_columns_float32_holds_are_narrowed_within_its_rounding():
    x = np.array([0.0, 1.0, 2.5e4, 31_000.123456789, -7.25e-12, np.nan, np.inf, -np.inf, 9.9e29])
    y = np.linspace(-1, 1, x.size)
    fig, source = plot_with(x=x, y=y)
    assert narrow_floats([fig]) == 2
    for name, original in (("x", x), ("y", y)):
        got = source.data[name]
        assert got.dtype == np.float32
        finite = np.isfinite(original)
        assert np.array_equal(np.isnan(got), np.isnan(original))
        assert np.array_equal(got[~finite & ~np.isnan(original)], original[~finite & ~np.isnan(original)])
        # IEEE 754 round-to-nearest into a 24-bit significand: relative change <= 2^-24
        assert np.all(np.abs(got[finite].astype(float) - original[finite]) <= 2.0 ** -24 * np.abs(original[finite]))


def test_columns_beyond_float32_stay_float64():
    # 1e-300 would flush to 0 (a point lost on a log axis); 1e31 and 1e-31 lie past the margins that the
    # module keeps inside float32's normal range (1.2e-38 to 3.4e38), so the browser's sums stay normal too.
    for outside in (1e-300, 1e31, -1e-31):
        fig, source = plot_with(x=np.array([1.0, outside]), y=np.array([1.0, 2.0]))
        narrow_floats([fig])
        assert source.data["x"].dtype == np.float64 and source.data["x"][1] == outside
        assert source.data["y"].dtype == np.float32


def test_integer_and_text_columns_are_left_alone():
    fig, source = plot_with(x=np.arange(5), y=np.ones(5), label=np.array(list("abcde")))
    narrow_floats([fig])
    assert source.data["x"].dtype == np.arange(5).dtype and source.data["label"].dtype.kind == "U"


def test_packed_text_is_gzip_in_base64_and_the_same_every_time():
    payload = ("lifetime " * 5000).encode()
    packed = gzip_base64(payload)
    assert re.fullmatch(r"[A-Za-z0-9+/]*={0,2}", packed)      # RFC 4648 alphabet: nothing that ends a script
    assert unpack_text(packed) == payload.decode()
    assert gzip.decompress(base64.b64decode(packed)) == payload     # plain RFC 1952 gzip
    assert gzip_base64(payload) == packed                    # no time stamp inside: same input, same text
    assert len(packed) < len(payload) / 20


def test_a_packed_page_has_one_div_per_plot_and_both_payloads():
    figs = [plot_with(x=np.arange(10.0), y=np.arange(10.0) ** 2)[0] for _ in range(3)]
    packed = pack_plots(figs)
    page = "".join(packed.divs) + packed.note + packed.tail
    roots = re.findall(r'data-root-id="([^"]+)"', page)
    assert roots == [f.id for f in figs]
    payloads = packed_payloads(page)
    assert "/* BEGIN bokeh.min.js */" in payloads["bokehjs"]
    (doc,) = payloads["docs"]["docs_json"].values()
    assert [r["id"] for r in doc["roots"]] == roots
    assert payloads["docs"]["render_items"][0]["root_ids"] == roots
