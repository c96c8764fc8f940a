"""Markup in a scenario file never runs (issue 14, item 2): a scenario whose title, story, time unit,
parameter name and label, and file name are all script payloads, served and saved as a report.

Checked in a real browser (Debian's Chromium, headless, every request that leaves
the loopback server aborted): each payload would push its tag onto
``window.__pwned`` or open a dialog if the browser ran it. The same text must
still be shown to the user, literally.
"""
from __future__ import annotations

import time

import pytest

from hostile_inputs import FLAG, HOSTILE_NAME, write_hostile_scenarios
from served import drawing_board_server, offline_page

pytestmark = pytest.mark.browser

playwright_api = pytest.importorskip("playwright.sync_api")


@pytest.fixture(scope="module")
def hostile_server(tmp_path_factory):
    folder = tmp_path_factory.mktemp("scenarios")
    write_hostile_scenarios(folder)
    reports = tmp_path_factory.mktemp("reports")
    env = {"LIFEDRAW_SCENARIOS": str(folder), "LIFEDRAW_REPORT_DIR": str(reports)}
    with drawing_board_server(env, serve_args="scenario='hostile'") as url:
        yield url, reports


def _flag(page):
    return page.evaluate(f"() => window.{FLAG} === undefined ? null : window.{FLAG}")


def _wait_for(condition, timeout=30.0, what="the page"):
    deadline = time.time() + timeout
    while time.time() < deadline:
        if condition():
            return
        time.sleep(0.25)
    raise AssertionError(f"timed out waiting for {what}")


def test_hostile_scenario_text_is_shown_not_run_in_the_page(hostile_server, browser):
    url, _ = hostile_server
    page, dialogs, outside, errors = offline_page(browser, url)
    page.wait_for_selector(".ld-step-8", timeout=90_000)
    cell1, cell6 = page.locator(".ld-step-1"), page.locator(".ld-step-6")
    # The text is there, literally: the title, the unit in the life table, the slider's label.
    _wait_for(lambda: "<img src=x onerror=" in cell1.locator("h3").first.inner_text(), what="the title")
    _wait_for(lambda: cell6.locator("table").count() > 0 and "MTTF (</script><img src=x" in cell6.locator("table").first.inner_text(),
              what="the life table")
    assert "[link](javascript:" in cell1.locator(".ld-description p").first.inner_text()
    assert any('push("label")' in t for t in cell1.locator(".bk-slider-title").all_inner_texts())
    # Hover over the live histogram: its tooltip names the axis, whose label carries the unit.
    canvas = page.locator(".ld-step-3 canvas").first
    box = canvas.bounding_box()
    page.mouse.move(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
    # A formula with markup: the error box quotes it back.
    page.locator(".ld-step-1 .bk-btn-group button", has_text="density").click()
    page.locator(".ld-step-1 textarea").fill('<img src=x onerror=(window.__pwned=[1])> [a](javascript:x)')
    page.locator(".ld-step-1 button", has_text="Use this model").click()
    _wait_for(lambda: page.locator(".ld-step-1 .ld-error").count() > 0
              and "<img src=x" in page.locator(".ld-step-1 .ld-error").first.inner_text(),
              what="the formula's error message")
    # The scenario whose file name is markup.
    select = page.locator(".ld-step-1 select").first
    label = next(o for o in select.locator("option").all_inner_texts() if HOSTILE_NAME in o)
    version = int(page.locator(".ld-redraw").get_attribute("data-version"))
    select.select_option(label=label)
    _wait_for(lambda: int(page.locator(".ld-redraw").get_attribute("data-version")) > version,
              what="the other scenario")
    page.wait_for_timeout(1500)      # let the periodic updates redraw every cell
    assert _flag(page) is None, f"markup ran in the page: {_flag(page)}"
    assert dialogs == []
    assert outside == []
    assert errors == [], errors


def test_hostile_scenario_text_is_shown_not_run_in_the_saved_report(hostile_server, browser):
    url, reports = hostile_server
    page, dialogs, outside, errors = offline_page(browser, url)
    page.wait_for_selector(".ld-step-8", timeout=90_000)
    page.locator(".ld-step-8 button", has_text="Write HTML report").click()
    page.wait_for_selector(".ld-step-8 .ld-path", timeout=120_000)
    assert _flag(page) is None
    written = sorted(reports.glob("*.html"))
    assert len(written) == 1 and written[0].name.startswith("lifedraw-hostile-")

    report, r_dialogs, r_outside, r_errors = offline_page(browser, allow=("file://",))
    report.goto(written[0].as_uri())
    _wait_for(lambda: report.locator("canvas").count() >= 5, timeout=60, what="the report's plots")
    report.wait_for_timeout(500)
    assert "<img src=x onerror=" in report.locator("h1").inner_text()
    assert "MTTF (</script><img src=x" in report.locator("#life").inner_text()
    assert 'push("label")' in report.locator("#model").inner_text()
    assert _flag(report) is None, f"markup ran in the report: {_flag(report)}"
    assert r_dialogs == [] and dialogs == []
    assert r_outside == [] and outside == []
    assert r_errors == [], r_errors
