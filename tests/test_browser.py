"""The drawing board in a real browser (headless Chromium driven by Playwright): the page renders
offline, reacts to sliders, the editor, the method and the buttons, and writes its report.

One server for the module (a subprocess on a free loopback port); each test opens
its own page, so its own server session. Every request that is not to the
loopback server is aborted, so the page must bring all of its scripts itself.
Screenshots go to test-artifacts/.
"""
from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

playwright_api = pytest.importorskip("playwright.sync_api")

ROOT = Path(__file__).resolve().parent.parent
ARTIFACTS = ROOT / "test-artifacts"
CHROMIUM = "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
        "--disable-component-update", "--disable-sync"]
STEPS = 8

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


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    port = _free_port()
    reports = tmp_path_factory.mktemp("reports")
    code = f"from dashboard.app import serve; serve(port={port})"
    env = dict(os.environ, LIFEDRAW_REPORT_DIR=str(reports))
    proc = subprocess.Popen([sys.executable, "-c", code], cwd=ROOT, env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    url = f"http://127.0.0.1:{port}/"
    # Generous on a shared, loaded machine: a short per-request timeout only piles up sessions.
    deadline = time.time() + 180
    while True:
        try:
            urllib.request.urlopen(url + "favicon.ico", timeout=60)   # the icon: a page would build a session
            break
        except (urllib.error.URLError, OSError):
            if proc.poll() is not None or time.time() > deadline:
                proc.kill()
                pytest.fail("the dashboard server did not start")
            time.sleep(0.3)
    yield url
    proc.terminate()
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()


@pytest.fixture(scope="module")
def browser():
    with playwright_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=ARGS)
        yield b
        b.close()


class Page:
    """A page of the drawing board with the network cut off and its errors collected."""

    def __init__(self, browser, url):
        self.page = browser.new_page(viewport={"width": 1360, "height": 1000})
        self.errors: list[str] = []
        self.outside: list[str] = []
        self.page.on("pageerror", lambda e: self.errors.append(f"page error: {e}"))
        self.page.on("console", lambda m: self.errors.append(f"console: {m.text}") if m.type == "error" else None)
        self.page.route("**/*", self._route)
        self.page.goto(url)
        self.page.wait_for_selector(".ld-redraw", timeout=60_000)
        self.page.wait_for_selector(f".ld-step-{STEPS}", timeout=30_000)

    def _route(self, route):
        url = route.request.url
        if url.startswith(("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:")):
            route.continue_()
        else:
            self.outside.append(url)
            route.abort()

    def step(self, n):
        # Newer sections are called steps (the fleet step is .ld-step-7).
        return self.page.locator(f".ld-step-{n}, .ld-step-{n}")

    def version(self) -> int:
        return int(self.page.locator(".ld-redraw").get_attribute("data-version"))

    def batch(self) -> int:
        return int(self.page.locator(".ld-redraw").get_attribute("data-batch"))

    def wait_until(self, condition, timeout=20.0, what="the page to update"):
        deadline = time.time() + timeout
        while time.time() < deadline:
            if condition():
                return
            self.page.wait_for_timeout(100)
        raise AssertionError(f"timed out waiting for {what}")

    def drag_slider(self, css_class: str, dx: float) -> None:
        handle = self.page.locator(f".{css_class} .noUi-handle")
        handle.scroll_into_view_if_needed()
        box = handle.bounding_box()
        x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
        self.page.mouse.move(x, y)
        self.page.mouse.down()
        self.page.mouse.move(x + dx, y, steps=5)
        self.page.mouse.up()

    def shot(self, name: str) -> None:
        ARTIFACTS.mkdir(exist_ok=True)
        self.page.screenshot(path=str(ARTIFACTS / f"{name}.png"), full_page=True)

    def close(self):
        self.page.close()


@pytest.fixture
def page(browser, server):
    p = Page(browser, server)
    yield p
    p.close()


def test_the_page_loads_offline_with_every_cell_and_no_console_errors(page):
    page.page.wait_for_timeout(1500)
    for n in range(1, STEPS + 1):
        assert page.step(n).is_visible(), f"cell {n} is not shown"
    assert page.step(3).locator("canvas").count() >= 5         # histogram, QQ, PP, two traces
    assert page.step(4).locator("canvas").count() >= 1         # the method's geometry
    assert page.page.locator(".ld-caution").first.is_visible()
    assert page.page.title() == "lifedraw — lifetime sampler drawing board"
    page.shot("01-page-loaded")
    assert page.outside == [], "the page asked for files outside the server"
    assert page.errors == []


def test_moving_a_slider_changes_the_plotted_model(page):
    before_curve = page.page.evaluate(MODEL_CURVE_JS)
    before = page.version()
    page.drag_slider("ld-slider-beta", 40)
    page.wait_until(lambda: page.version() > before, what="the refit after the slider release")
    page.page.wait_for_timeout(300)
    after_curve = page.page.evaluate(MODEL_CURVE_JS)
    assert before_curve is not None and after_curve is not None
    assert max(abs(a - b) for a, b in zip(before_curve, after_curve)) > 0.05 * max(before_curve)
    assert "shape (beta) = 2.6," not in page.step(1).locator(".ld-description pre").inner_text()
    page.shot("02-slider-moved")
    assert page.errors == []


def test_two_tabs_keep_their_own_state(browser, server, page):
    other = Page(browser, server)
    try:
        before = other.version()
        page.drag_slider("ld-slider-eta", 40)
        page.wait_until(lambda: page.version() > before, what="the refit in the first tab")
        other.page.wait_for_timeout(800)
        assert other.version() == before
        assert "scale (eta) = 31000" in other.step(1).locator(".ld-description pre").inner_text()
        other.shot("03-second-tab-unchanged")
    finally:
        other.close()


def test_a_bad_formula_shows_its_message_and_the_app_keeps_working(page):
    cell = page.step(1)
    cell.get_by_role("button", name="density f(t)").click()
    cell.get_by_placeholder("e.g. t**(k - 1)*exp(-(t/s)**p)").fill("t**(k - 1)*exp(")
    params = cell.get_by_placeholder("shape = 2.5, scale = 9000")
    params.fill("k = 2")
    params.press("Tab")
    cell.get_by_role("button", name="Use this model").click()
    message = cell.get_by_text("was never closed")
    message.wait_for(timeout=15_000)
    assert "model.formula: syntax error" in message.inner_text()
    assert "Weibull lifetime" in cell.locator(".ld-description pre").inner_text()    # the last valid model is kept
    page.shot("04-bad-formula")
    before = page.batch()
    page.step(2).get_by_role("button", name="▶ Start").click()
    page.wait_until(lambda: page.batch() > before, what="a batch after the bad formula")
    assert "100,000 draws" in page.page.locator(".ld-redraw").inner_text()   # the scenario's sample size
    assert page.errors == []


def test_switching_the_method_changes_the_geometry_cell(page):
    page.step(1).locator("select").first.select_option(label=_option(page, "sensor-bathtub"))
    page.wait_until(lambda: "Vineyard" in page.step(1).locator("h3").first.inner_text(),
                    what="the bathtub scenario")
    method = page.step(2).locator("select").first
    geometry = page.step(4).locator(".ld-geometry-method")
    method.select_option("inversion")
    page.wait_until(lambda: geometry.inner_text() == "inversion", what="the inversion geometry")
    method.select_option("composition")
    page.wait_until(lambda: geometry.inner_text() == "composition", what="the composition geometry")
    page.wait_until(lambda: page.step(4).locator("canvas").count() >= 2, what="the composition pictures")
    page.step(4).scroll_into_view_if_needed()
    page.shot("05-geometry-composition")
    assert page.errors == []


def _option(page, name):
    """The scenario picker's label for a scenario name (labels end with [name])."""
    labels = page.step(1).locator("select").first.locator("option").all_inner_texts()
    return next(label for label in labels if label.endswith(f"[{name}]"))


def test_the_method_comparison_runs(page):
    cell = page.step(5)
    cell.get_by_role("button", name="Measure all methods").click()
    table = cell.locator("table.ld-comparison")
    table.wait_for(timeout=60_000)
    methods = [m for m in page.step(2).locator("select").first.locator("option").all_inner_texts() if m != "auto"]
    rows = table.locator("tbody tr")
    assert rows.count() == len(methods)
    assert "inversion" in table.inner_text()
    page.wait_until(lambda: cell.locator("canvas").count() >= 1, what="the comparison charts")
    cell.scroll_into_view_if_needed()
    page.shot("06-comparison")
    assert page.errors == []


def test_the_report_is_written_and_opens_offline(page, browser):
    cell = page.step(8)
    cell.get_by_role("button", name="Write HTML report").click()
    path_text = cell.locator(".ld-path")
    path_text.wait_for(timeout=90_000)
    path = Path(path_text.inner_text())
    assert path.exists() and path.suffix == ".html"
    page.shot("07-report-written")

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
    report.wait_for_function("() => document.querySelectorAll('.bk-root, [data-root-id]').length > 0")
    deadline = time.time() + 20
    while report.locator("canvas").count() < 6 and time.time() < deadline:
        report.wait_for_timeout(200)
    assert report.locator("canvas").count() >= 6
    report.screenshot(path=str(ARTIFACTS / "08-report-offline.png"), full_page=True)
    report.close()
    assert errors == [] and outside == []
