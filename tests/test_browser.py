"""The drawing board in a real browser (headless Chromium driven by Playwright): the page renders
offline at 1400 and 1024 px, reacts to sliders, the editor, the upload, the method menu and the
buttons, draws the pictures the trade reads, decides the method comparison and writes its report.

One server for the module (a subprocess on a free loopback port, started again on another port
if the first was taken meanwhile); each test opens its own page, so its own server session. Every
request that is not to the loopback server is aborted, so the page must bring all of its scripts
itself. Tests wait for conditions on the page, never for a fixed time. Screenshots go to
test-artifacts/.
"""
from __future__ import annotations

import time
from pathlib import Path

import pytest

from served import drawing_board_server

pytestmark = pytest.mark.browser

pytest.importorskip("playwright.sync_api")

ROOT = Path(__file__).resolve().parent.parent
ARTIFACTS = ROOT / "test-artifacts"
STEPS = 8
REPORT_STEP = STEPS          # the last step writes the report
WIDTHS = (1400, 1024)
FIRST_BATCH = 50_000

# The model's density curve is the only 801-point data source on the page (plots.density_histogram).
MODEL_CURVE_JS = """() => {
  for (const doc of Bokeh.documents) {
    for (const m of doc._all_models.values()) {
      const d = m.data;
      if (d == null || typeof d !== 'object') continue;
      const get = (k) => (d instanceof Map ? d.get(k) : d[k]);
      const age = get('age'), density = get('density');
      if (age && density && age.length === 801) return Array.from(density);
    }
  }
  return null;
}"""
# Every Bokeh model on the page, by class name (BokehJS keeps the Python class names).
MODELS_JS = """(name) => {
  const out = [];
  for (const doc of Bokeh.documents) for (const m of doc._all_models.values())
    if (m.constructor.__name__ === name) out.push(m);
  return out.length;
}"""
LOGOS_JS = """() => {
  let n = 0;
  for (const doc of Bokeh.documents) for (const m of doc._all_models.values())
    if (m.constructor.__name__ === 'Toolbar' && m.logo != null) n++;
  return n;
}"""
# A legend in a plot's centre panel is drawn over the data; outside it sits beside or above.
LEGENDS_INSIDE_JS = """() => {
  const inside = [];
  for (const doc of Bokeh.documents) for (const m of doc._all_models.values()) {
    if (!Array.isArray(m.center)) continue;
    for (const r of m.center)
      if (r.constructor.__name__ === 'Legend' && r.visible && r.items.length) inside.push(m.title ? m.title.text : '?');
  }
  return inside;
}"""
# Tick labels as the page's own formatters write them, for given tick values.
FORMAT_TICKS_JS = """([axis, ticks]) => {
  const out = [];
  for (const doc of Bokeh.documents) for (const m of doc._all_models.values()) {
    if (m.constructor.__name__ !== axis) continue;
    out.push(m.formatter.constructor.__name__ + ': ' + m.formatter.doFormat(ticks, {loc: 0}).join(' | '));
  }
  return out;
}"""
TRACE_RANGES_JS = """() => {
  const out = [];
  for (const doc of Bokeh.documents) for (const m of doc._all_models.values()) {
    const title = m.title && m.title.text;
    if (m.x_range && title && (title.startsWith('Kolmogorov') || title.startsWith('acceptance')))
      out.push([m.x_range.start, m.x_range.end]);
  }
  return out;
}"""
LEGEND_LABELS_JS = """() => {
  const out = [];
  for (const doc of Bokeh.documents) for (const m of doc._all_models.values())
    if (m.constructor.__name__ === 'LegendItem') out.push(String(m.label.value));
  return out;
}"""


def _served():
    # Outside pytest's temporary folders, which another pytest run on the machine may prune.
    reports = ARTIFACTS / "reports"
    reports.mkdir(parents=True, exist_ok=True)
    with drawing_board_server({"LIFEDRAW_REPORT_DIR": str(reports)}) as url:
        yield url


@pytest.fixture(scope="module")
def server():
    yield from _served()


@pytest.fixture
def own_server():
    """A server of its own, for a test whose background work must not queue behind the sessions
    (comparisons, fleet studies) that earlier tests left on the shared one."""
    yield from _served()


class Page:
    """A page of the drawing board with the network cut off and its errors collected."""

    def __init__(self, browser, url, width=1400):
        self.page = browser.new_page(viewport={"width": width, "height": 1000})
        self.width = width
        self.errors: list[str] = []
        self.outside: list[str] = []
        self.page.on("pageerror", lambda e: self.errors.append(f"page error: {e}"))
        self.page.on("console", lambda m: self.errors.append(f"console: {m.text}") if m.type == "error" else None)
        self.page.route("**/*", self._route)
        self.page.goto(url, timeout=120_000)
        self.page.wait_for_selector(".ld-redraw", timeout=120_000)
        self.page.wait_for_selector(f".ld-step-{STEPS}", timeout=30_000)

    def _route(self, route):
        url = route.request.url
        if url.startswith(("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:")):
            route.continue_()
        else:
            self.outside.append(url)
            route.abort()

    def step(self, n):
        return self.page.locator(f".ld-step-{n}")

    def marker(self, name: str) -> int:
        return int(self.page.locator(".ld-redraw").get_attribute(f"data-{name}"))

    def version(self) -> int:
        return self.marker("version")

    def batch(self) -> int:
        return self.marker("batch")

    def draws(self) -> int:
        return self.marker("draws")

    def text(self, css: str) -> str:
        """The text of the paragraphs, lists and code blocks under ``css`` (Panel panes keep their
        content in a shadow root, which these locators pierce; the host's own innerText does not)."""
        return "\n".join(self.page.locator(f"{css} :is(p, pre, li, h3, b)").all_inner_texts())

    def js(self, script, arg=None):
        return self.page.evaluate(script, arg)

    def wait_until(self, condition, timeout=60.0, what="the page to update"):
        """Poll a condition on the page (each poll yields to the page's event loop for 100 ms)."""
        deadline = time.time() + timeout
        while time.time() < deadline:
            if condition():
                return
            self.page.wait_for_timeout(100)
        raise AssertionError(f"timed out waiting for {what}")

    def wait_for_canvases(self, step: int, count: int, timeout=60.0):
        self.wait_until(lambda: self.step(step).locator("canvas").count() >= count, timeout,
                        f"{count} pictures in step {step}")

    def drag_slider(self, css_class: str, dx: float) -> None:
        handle = self.page.locator(f".{css_class} .noUi-handle")
        handle.scroll_into_view_if_needed()
        box = handle.bounding_box()
        x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
        self.page.mouse.move(x, y)
        self.page.mouse.down()
        self.page.mouse.move(x + dx, y, steps=5)
        self.page.mouse.up()

    def pick_scenario(self, name: str, text_in_title: str) -> None:
        picker = self.step(1).locator("select").first
        label = next(o for o in picker.locator("option").all_inner_texts() if o.endswith(f"[{name}]"))
        picker.select_option(label=label)
        self.wait_until(lambda: text_in_title in self.step(1).locator("h3").first.inner_text(),
                        what=f"the scenario {name}")

    def shot(self, name: str) -> None:
        ARTIFACTS.mkdir(exist_ok=True)
        self.page.screenshot(path=str(ARTIFACTS / f"{name}-{self.width}.png"), full_page=True)

    def close(self):
        self.page.close()


@pytest.fixture
def page(browser, server):
    p = Page(browser, server)
    yield p
    p.close()


@pytest.fixture(params=WIDTHS, ids=lambda w: f"{w}px")
def sized_page(request, browser, server):
    p = Page(browser, server, request.param)
    yield p
    p.close()


def _overlap(a, b) -> bool:
    return not (a["x"] + a["width"] <= b["x"] or b["x"] + b["width"] <= a["x"]
                or a["y"] + a["height"] <= b["y"] or b["y"] + b["height"] <= a["y"])


# ---- the whole page, at both widths -----------------------------------------------------------

def test_the_page_loads_offline_with_every_step_and_the_trade_pictures(sized_page):
    page = sized_page
    # histogram, hazard rate, cumulative hazard, Weibull plot, QQ, PP, two traces
    page.wait_for_canvases(3, 8)
    page.wait_for_canvases(4, 1)
    for n in range(1, STEPS + 1):
        assert page.step(n).is_visible(), f"step {n} is not shown"
    assert page.page.locator(".ld-caution").first.is_visible()
    assert page.page.title() == "lifedraw — lifetime sampler drawing board"
    heading = page.page.locator("h1").inner_text()
    assert heading == "lifedraw — lifetime sampler drawing board"
    page.shot("01-page-loaded")
    assert page.outside == [], "the page asked for files outside the server"
    assert page.errors == []


def test_toolbars_keep_their_tools_without_the_library_logo(sized_page):
    page = sized_page
    page.wait_for_canvases(3, 8)
    assert page.js(MODELS_JS, "Toolbar") >= 9
    assert page.js(MODELS_JS, "BoxZoomTool") >= 9
    assert page.js(LOGOS_JS) == 0


def test_legends_sit_outside_the_data(sized_page):
    page = sized_page
    page.wait_for_canvases(3, 8)
    assert page.js(MODELS_JS, "Legend") >= 4
    assert page.js(LEGENDS_INSIDE_JS) == []


def test_at_this_width_the_editor_and_the_upload_area_do_not_overlap(sized_page):
    page = sized_page
    step = page.step(1)
    family = step.locator(".ld-editor select").first
    chooser = step.locator(".ld-upload-area input[type=file]").first
    family.scroll_into_view_if_needed()
    boxes = {name: loc.bounding_box() for name, loc in (
        ("family menu", family), ("file chooser", chooser), ("editor", step.locator(".ld-editor").first),
        ("upload area", step.locator(".ld-upload-area").first),
        ("unit", step.locator(".ld-upload-unit input").first),
        ("missions", step.locator(".ld-upload-missions input").first))}
    assert all(boxes.values()), boxes
    assert not _overlap(boxes["family menu"], boxes["file chooser"])
    assert not _overlap(boxes["editor"], boxes["upload area"])
    assert not _overlap(boxes["unit"], boxes["missions"])
    inputs = page.step(2).locator("select, input").all()
    generator = [i.bounding_box() for i in inputs if i.is_visible()]
    assert len(generator) >= 5
    assert not any(_overlap(a, b) for i, a in enumerate(generator) for b in generator[i + 1:])
    page.shot("02-model-step")


def test_log_axes_label_every_tick_the_same_way(sized_page):
    page = sized_page
    page.step(3).locator(".ld-hazard-log input").check()
    page.wait_until(lambda: page.js(MODELS_JS, "LogAxis") >= 6, what="the hazard on log-log axes")
    labels = page.js(FORMAT_TICKS_JS, ["LogAxis", [1e-7, 1e-6, 2.5e-4, 1.0, 1000.0]])
    assert len(labels) >= 6
    for s in labels:
        assert s.endswith("1e-7 | 1e-6 | 2.5e-4 | 1e0 | 1e3"), s         # one notation, never 0.000001
    page.shot("03-hazard-log")
    assert page.errors == []


# ---- the model step ---------------------------------------------------------------------------

def test_moving_a_slider_changes_the_plotted_model(page):
    before_curve = page.js(MODEL_CURVE_JS)
    before = page.version()
    page.drag_slider("ld-slider-beta", 40)
    page.wait_until(lambda: page.version() > before, what="the refit after the slider release")
    page.wait_until(lambda: page.js(MODEL_CURVE_JS) != before_curve, what="the new model curve")
    after_curve = page.js(MODEL_CURVE_JS)
    assert before_curve is not None and after_curve is not None
    assert max(abs(a - b) for a, b in zip(before_curve, after_curve)) > 0.05 * max(before_curve)
    assert "shape (beta) = 2.6," not in page.step(1).locator(".ld-description pre").inner_text()
    assert page.errors == []


def test_two_tabs_keep_their_own_state(browser, server, page):
    other = Page(browser, server)
    try:
        before = other.version()
        page.drag_slider("ld-slider-eta", 40)
        page.wait_until(lambda: page.version() > before, what="the refit in the first tab")
        # A round trip through the second tab's own session: anything leaking from the first
        # tab would have arrived before the answer to this.
        batch = other.batch()
        other.step(2).get_by_role("button", name="▶ Start").click()
        other.wait_until(lambda: other.batch() > batch, what="a batch in the second tab")
        assert other.version() == before
        assert "scale (eta) = 31000" in other.step(1).locator(".ld-description pre").inner_text()
    finally:
        other.close()


def test_a_bad_formula_is_shown_verbatim_with_the_caret_under_its_column(page):
    step = page.step(1)
    step.get_by_role("button", name="density f(t)").click()
    formula = "a*b*t**(b - 1)*exp(-a*t**b) + foo(t)"
    step.get_by_placeholder("e.g. t**(k - 1)*exp(-(t/s)**p)").fill(formula)
    params = step.get_by_placeholder("shape = 2.5, scale = 9000")
    params.fill("a = 0.001, b = 2")
    params.press("Tab")
    step.get_by_role("button", name="Use this model").click()
    verbatim = step.locator(".ld-error pre")
    verbatim.wait_for(timeout=15_000)
    assert "unknown function 'foo'" in step.locator(".ld-error").inner_text()
    line, caret = verbatim.inner_text().split("\n")[:2]
    assert line.strip() == formula                                 # every star kept
    assert caret.index("^") == line.index("foo")                  # the caret under the right column
    font = verbatim.evaluate("e => getComputedStyle(e).fontFamily")
    assert "mono" in font.lower() or "consolas" in font.lower()
    assert "Weibull lifetime" in step.locator(".ld-description pre").inner_text()   # the last valid model runs
    page.shot("04-bad-formula")
    before = page.batch()
    page.step(2).get_by_role("button", name="▶ Start").click()
    page.wait_until(lambda: page.batch() > before, what="a batch after the bad formula")
    assert page.errors == []


def test_uploaded_field_data_asks_for_its_unit_and_mission_times(page, tmp_path):
    step = page.step(1)
    csv = tmp_path / "bushings.csv"
    csv.write_text("time,suspended\n5200,0\n8100,0\n9400,1\n11800,0\n12500,0\n14100,1\n15000,0\n")
    step.locator(".ld-upload-area input[type=file]").set_input_files(str(csv))
    use = step.get_by_role("button", name="Use this field data")
    page.wait_until(lambda: use.is_enabled(), what="the upload to arrive")
    use.click()
    step.get_by_text("say in which unit the ages are recorded").wait_for(timeout=15_000)
    step.locator(".ld-upload-unit input").fill("cycles")
    step.locator(".ld-upload-missions input").fill("5000, 10000")
    step.locator(".ld-upload-missions input").press("Tab")
    use.click()
    page.wait_until(lambda: "Ages in cycles" in page.text(".ld-step-1 .ld-description"),
                    what="the field data as the model")
    assert "Mission times: 5,000, 10,000." in page.text(".ld-step-1 .ld-description")
    page.wait_until(lambda: "field data" in page.js(LEGEND_LABELS_JS), what="the field data's own points")
    page.shot("05-field-data")
    assert page.errors == []


def test_a_mixture_shows_its_weights_as_used_and_an_empty_editor(page):
    page.pick_scenario("sensor-bathtub", "Vineyard")
    page.wait_until(lambda: "rescaled" in page.text(".ld-weights"), what="the mixture's weights")
    assert "share with solder defects: set 0.08 → 8.0 %" in page.text(".ld-weights")
    assert page.step(1).locator(".ld-editor select").first.input_value() == "(choose a family)"
    assert page.step(1).get_by_placeholder("shape = 2.5, scale = 9000").input_value() == ""
    assert page.errors == []


def test_an_edited_model_says_it_was_edited(page):
    step = page.step(1)
    step.locator(".ld-editor select").first.select_option(label="Lognormal")
    params = step.get_by_placeholder("shape = 2.5, scale = 9000")
    params.fill("mu = 9.5, sigma = 0.4")
    params.press("Tab")
    step.get_by_role("button", name="Use this model").click()
    page.wait_until(lambda: "Edited in this session" in page.text(".ld-step-1 .ld-description"),
                    what="the edited model's story")
    assert "edited model" in step.locator("h3").first.inner_text()


# ---- the generator step -----------------------------------------------------------------------

def test_start_streams_until_pause_and_the_counter_reads_draws(page):
    generator = page.step(2)
    pause = generator.get_by_role("button", name="❚❚ Pause")
    assert pause.is_disabled()
    generator.get_by_role("button", name="▶ Start").click()
    page.wait_until(lambda: page.draws() >= 4 * FIRST_BATCH, what="the stream to go past the first batches")
    assert pause.is_enabled()
    pause.click()
    page.wait_until(lambda: generator.locator(".ld-run-state").inner_text() == "paused", what="the pause")
    shown = page.draws()
    marker = page.page.locator(".ld-redraw").inner_text()
    assert marker == f"{shown:,} draws so far"                     # draws, not versions or batches
    assert f"{shown:,} draws" in generator.locator(".ld-draw-count").inner_text()
    assert "until Pause" in page.text(".ld-step-2")


def test_after_reset_the_trace_axes_count_draws_from_zero(page):
    page.step(2).get_by_role("button", name="↺ Reset").click()
    page.wait_until(lambda: page.draws() == 0, what="the reset")
    # Before the first batch the axes span the first thousand draws (not 0 to 1, which read "0 0 0 0 0 1").
    page.wait_until(lambda: page.js(TRACE_RANGES_JS) == [[0, 1000], [0, 1000]], what="the trace axes after the reset")
    labels = page.js(FORMAT_TICKS_JS, ["LinearAxis", [0, 200, 400, 60_000_000]])
    assert any(s.endswith("0 | 200 | 400 | 60 M") for s in labels), labels   # no "0 0 0 0 0 1", M for millions
    page.step(3).scroll_into_view_if_needed()
    page.shot("06-after-reset")


def test_the_method_menu_offers_only_what_serves_the_model(page):
    menu = page.step(2).locator("select").first
    assert menu.locator("option[value=table]").is_disabled()
    assert menu.locator("option[value=composition]").is_disabled()
    assert menu.locator("option[value=inversion]").is_enabled()
    reasons = page.text(".ld-method-availability")
    assert "table: the table method serves binned or discrete targets" in reasons
    page.pick_scenario("sensor-bathtub", "Vineyard")
    page.wait_until(lambda: menu.locator("option[value=composition]").is_enabled(), what="the mixture's menu")
    assert menu.locator("option[value=table]").is_disabled()


def test_switching_the_method_changes_the_geometry_step(page):
    method = page.step(2).locator("select").first
    geometry = page.step(4).locator(".ld-geometry-method")
    method.select_option("rejection")
    page.wait_until(lambda: geometry.inner_text() == "rejection", what="the rejection geometry")
    page.wait_for_canvases(4, 2)
    assert page.js(LEGENDS_INSIDE_JS) == []                        # the rejection picture's legend too
    page.pick_scenario("sensor-bathtub", "Vineyard")
    method.select_option("composition")
    page.wait_until(lambda: geometry.inner_text() == "composition", what="the composition geometry")
    page.wait_for_canvases(4, 2)
    page.step(4).scroll_into_view_if_needed()
    page.shot("07-geometry-composition")
    assert page.errors == []


# ---- the comparison and the report ------------------------------------------------------------

def test_the_method_comparison_names_the_winner_with_dots_not_bars(page):
    step = page.step(5)
    step.get_by_role("button", name="Measure all methods").click()
    verdict = step.locator(".ld-verdict")
    verdict.wait_for(timeout=90_000)
    assert verdict.inner_text().startswith("For 1 M draws at u-error ≤ 1e-10, use ")
    table = step.locator("table.ld-comparison")
    methods = [m for m in page.step(2).locator("select").first.locator("option").all_inner_texts() if m != "auto"]
    assert table.locator("tbody tr").count() == len(methods)
    assert "ns per draw (range)" in table.inner_text()
    page.wait_for_canvases(5, 4)
    assert page.js(MODELS_JS, "VBar") == 0                        # points, no floating bars
    step.locator("select").nth(1).select_option(label="10,000")
    page.wait_until(lambda: verdict.inner_text().startswith("For 10,000 draws"), what="the verdict for 10,000")
    step.scroll_into_view_if_needed()
    page.shot("08-comparison")
    assert page.errors == []


def test_the_report_is_written_and_opens_offline(browser, own_server):
    page = Page(browser, own_server)
    step = page.step(REPORT_STEP)
    step.get_by_role("button", name="Write HTML report").click()
    path_text = step.locator(".ld-path")
    path_text.wait_for(timeout=240_000)     # a busy machine: fit, draws, checks, comparison, fleet study
    path = Path(path_text.inner_text())
    assert path.exists() and path.suffix == ".html"

    report = browser.new_page(viewport={"width": 1000, "height": 900})
    errors, outside = [], []
    report.on("pageerror", lambda e: errors.append(str(e)))
    report.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)

    def only_the_file(route):
        if route.request.url.startswith("file://"):
            route.continue_()
        else:
            outside.append(route.request.url)
            route.abort()

    report.route("**/*", only_the_file)
    report.goto(path.as_uri())
    # histogram, QQ, PP, hazard, cumulative hazard, Weibull plot, geometry, comparison charts
    deadline = time.time() + 60
    while report.locator("canvas").count() < 10 and time.time() < deadline:   # canvases sit in shadow roots
        report.wait_for_timeout(200)
    assert report.locator("canvas").count() >= 10
    assert report.evaluate(LOGOS_JS) == 0
    assert report.evaluate(LEGENDS_INSIDE_JS) == []
    assert "use " in report.locator(".ld-verdict").inner_text()
    ARTIFACTS.mkdir(exist_ok=True)
    report.screenshot(path=str(ARTIFACTS / "09-report-offline.png"), full_page=True)
    report.close()
    page.close()
    assert errors == [] and outside == []
