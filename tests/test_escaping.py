"""User text at the page's and the report's sinks is escaped (issue 14, item 2), without a browser.
Reference: the HTML standard's five characters that end text or an attribute (& < > " '), and
TOML 1.0's rule that a comment runs to the end of the line and holds no control characters.

The browser tests (test_browser_hostile.py) show that nothing runs; these show
where each sink escapes, fast, and that the downloads keep the text intact.
"""
from __future__ import annotations

import dataclasses
import re
import tomllib

import pytest

from hostile_inputs import PARAMETER, hostile_scenario_toml, payload
from lifedraw.dashboard import html_tables
from lifedraw.dashboard.escaping import css_token, file_stem, one_line, paragraphs, text
from lifedraw.dashboard.notices import error_html
from lifedraw.dashboard.report import build_report, default_report_path
from lifedraw.engine.scenarios import scenario_from_dict

# The opening tags of the payloads (hostile_inputs.py): what escaped text never contains.
TAG = re.compile(r"<(img src=x|svg onload=|script>\(window|b>k</b>)", re.IGNORECASE)


@pytest.fixture(scope="module")
def hostile():
    return scenario_from_dict(tomllib.loads(hostile_scenario_toml()), "hostile")


def test_text_escapes_the_five_html_characters():
    assert str(text("<a href=\"x\">'&'</a>")) == "&lt;a href=&#34;x&#34;&gt;&#39;&amp;&#39;&lt;/a&gt;"


def test_paragraphs_escape_each_paragraph():
    out = str(paragraphs("one <b>\nline\n\ntwo"))
    assert out == "one &lt;b&gt; line</p><p>two"


def test_one_line_removes_new_lines_and_control_characters():
    assert one_line("a\n[model]\r\x00\x1b b\u2028c") == "a [model] b c"
    assert len(one_line("x" * 500, limit=50)) == 50


def test_file_stem_and_css_token_keep_only_safe_characters():
    assert file_stem('../<svg onload="x">.toml') == "svg-onload-x-.toml"
    assert file_stem("../..") == "lifedraw"
    assert css_token('<b>k</b>"x', "ld-slider") == "ld-slider-b-k-b-x"


def test_html_table_escapes_every_cell_and_header():
    out = html_tables.html_table([payload("h")], [[payload("c"), 1.5]])
    assert not TAG.search(out)
    assert "&lt;img src=x" in out


def test_life_table_escapes_the_time_unit(hostile):
    from lifedraw import engine
    figures = {"sample": None, "exact": engine.exact_life_figures(hostile.target(), hostile.mission_times),
               "n": 0, "total": 0}
    out = html_tables.life_table(figures, hostile.time_unit)
    assert not TAG.search(out)
    assert "MTTF (&lt;/script&gt;&lt;img src=x" in out


def test_parameters_table_escapes_names_and_labels(hostile):
    out = html_tables.parameters_table(hostile.parameters)
    assert not TAG.search(out)
    assert "&lt;b&gt;k&lt;/b&gt;&#34;x" in out


def test_error_messages_are_escaped_with_their_caret_line():
    out = str(error_html("formula: bad <img src=x onerror=1>; row 3: <svg>\n  <img>\n  ^"))
    assert not TAG.search(out)
    assert "row 3: &lt;svg&gt;" in out and "<pre>  &lt;img&gt;\n  ^</pre>" in out


def test_the_report_escapes_every_piece_of_scenario_text(hostile):
    page = build_report(hostile, n=1000, compare_n=2000)
    body = page[page.index("</head>\n<body>"):page.rindex("<script")]      # the text sinks, before Bokeh's documents
    assert not TAG.search(body), TAG.search(body)
    for tag in ("title", "story", "unit", "label"):
        assert f'push(&#34;{tag}&#34;)' in body
    assert "&lt;b&gt;k&lt;/b&gt;&#34;x" in body       # the parameter's name
    # Bokeh's embedded documents escape "</script>", so the unit in the axis labels cannot end them.
    documents = page[page.rindex("<script"):]
    assert documents.count("</script>") == 1


def test_report_file_names_carry_no_markup(hostile, tmp_path):
    named = dataclasses.replace(hostile, name='<svg onload="x">/../..')
    path = default_report_path(tmp_path, named)
    assert path.parent == tmp_path
    assert re.fullmatch(r"lifedraw-[A-Za-z0-9_.-]+\.html", path.name)


def test_the_scenario_download_keeps_the_text_and_gains_no_keys(hostile):
    title = "Line one\n[model]\nkind = 'x'\x00\x1b end " + payload("t")
    sc = dataclasses.replace(hostile, title=title)
    written = sc.to_toml()
    data = tomllib.loads(written)                     # a control character in the comment would fail here
    assert data["title"] == title
    assert data["model"]["kind"] == "family"
    assert written.splitlines()[0].startswith("# lifedraw scenario: Line one [model]")
    assert list(data["parameters"]) == [PARAMETER]
