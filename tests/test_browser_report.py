"""The packed standalone report (dashboard.report with dashboard.packed_plots) in a real browser: Debian's
Chromium unpacks BokehJS and the plots from the file's own text and draws every plot, and not one
request leaves the file; a browser without DecompressionStream says why the plots are missing.
"""
from __future__ import annotations

import pytest

from lifedraw.dashboard.report import write_report
from lifedraw.engine.cautions import CAUTION
from lifedraw.engine.scenarios import load_scenario

pytestmark = pytest.mark.browser

playwright_api = pytest.importorskip("playwright.sync_api")

# Every canvas of every Bokeh root (they sit in shadow roots), and how many of its pixels are painted:
# neither transparent nor the white background. A plot that drew nothing has none.
PAINTED_JS = r"""
() => {
  const canvases = (root) => {
    const out = [...root.querySelectorAll('canvas')];
    for (const el of root.querySelectorAll('*')) if (el.shadowRoot) out.push(...canvases(el.shadowRoot));
    return out;
  };
  return [...document.querySelectorAll('[data-root-id]')].map((div) => {
    let painted = 0, count = 0;
    for (const c of canvases(div)) {      // the root's view sits inside its div
      count += 1;
      if (!c.width || !c.height) continue;
      const px = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
      for (let i = 0; i < px.length; i += 4) {
        if (px[i + 3] > 0 && (px[i] < 250 || px[i + 1] < 250 || px[i + 2] < 250)) painted += 1;
      }
    }
    return {root: div.getAttribute('data-root-id'), canvases: count, painted: painted};
  });
}
"""


@pytest.fixture(scope="module")
def report_file(tmp_path_factory):
    return write_report(load_scenario("gearbox-wearout"), tmp_path_factory.mktemp("report") / "gearbox.html",
                        n=20_000, seed=11, compare_n=20_000)


def open_offline(browser, path, init_script: str | None = None):
    """The report as a file, with every request recorded; any request but the file itself is aborted."""
    page = browser.new_page(viewport={"width": 1000, "height": 900})
    requests, errors = [], []
    page.on("request", lambda r: requests.append(r.url))
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.route("**/*", lambda r: r.continue_() if r.request.url == path.as_uri() else r.abort())
    if init_script:
        page.add_init_script(init_script)
    page.goto(path.as_uri())
    return page, requests, errors


def test_the_packed_report_draws_every_plot_without_a_request(browser, report_file):
    page, requests, errors = open_offline(browser, report_file)
    page.wait_for_function("() => document.getElementById('ld-plots-note').hidden", timeout=60_000)
    roots = page.evaluate("() => [...document.querySelectorAll('[data-root-id]')].map(d => d.dataset.rootId)")
    assert len(roots) >= 10
    # BokehJS holds a view for every root of the embedded document (Bokeh.index: model id -> view)
    views = page.evaluate("() => Object.values(window.Bokeh.index).map(v => v.model.id)")
    assert set(roots) <= set(views)
    page.wait_for_timeout(500)          # the last frames
    drawn = page.evaluate(PAINTED_JS)
    assert [d["root"] for d in drawn] == roots
    blank = [d for d in drawn if d["canvases"] == 0 or d["painted"] < 500]
    assert blank == [], f"plots without a drawing: {blank}"
    assert requests == [report_file.as_uri()], requests          # the file itself, nothing else
    assert errors == []
    page.close()


def test_a_browser_without_decompression_streams_says_why_the_plots_are_missing(browser, report_file):
    page, requests, errors = open_offline(browser, report_file, "delete window.DecompressionStream;")
    note = page.locator("#ld-plots-note")
    note.wait_for(timeout=30_000)
    assert "cannot be shown in this browser" in note.inner_text()
    assert "DecompressionStream" in note.inner_text()
    assert note.is_visible()
    assert page.locator("canvas").count() == 0                          # nothing was drawn
    assert page.evaluate("() => window.Bokeh === undefined")            # BokehJS was never run
    assert CAUTION[:60] in page.locator(".caution").first.inner_text()  # the text of the report is all there
    assert "MTTF" in page.locator("#life").inner_text()
    assert requests == [report_file.as_uri()] and errors == []
    page.close()
