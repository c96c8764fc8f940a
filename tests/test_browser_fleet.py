"""The fleet step in a real browser (headless Debian Chromium driven by Playwright): it renders
offline with the scenario's [fleet] settings, runs a study without freezing the page, draws its four
plots and states its assumptions; a bad setting is explained next to the step.

Its own server (a subprocess on a free loopback port); every request that is not to that server is
aborted. Screenshots go to test-artifacts/.
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
STEP = ".ld-step-fleet"


@pytest.fixture(scope="module")
def fleet_server(tmp_path_factory):
    env = {"LIFEDRAW_REPORT_DIR": str(tmp_path_factory.mktemp("reports"))}
    with drawing_board_server(env, serve_args="scenario='ebike-battery-returns'") as url:
        yield url


@pytest.fixture
def page(browser, fleet_server):
    page = browser.new_page(viewport={"width": 1360, "height": 1000})
    errors, outside = [], []
    page.on("pageerror", lambda e: errors.append(f"page error: {e}"))
    page.on("console", lambda m: errors.append(f"console: {m.text}") if m.type == "error" else None)

    def route(r):
        if r.request.url.startswith(("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:")):
            r.continue_()
        else:
            outside.append(r.request.url)
            r.abort()

    page.route("**/*", route)
    page.goto(fleet_server)
    page.wait_for_selector(STEP, timeout=60_000)
    yield page, errors
    page.close()
    assert outside == [], f"requests left the machine: {outside}"


def shot(page, name):
    ARTIFACTS.mkdir(exist_ok=True)
    page.locator(STEP).screenshot(path=str(ARTIFACTS / f"{name}.png"))


def test_the_fleet_step_simulates_and_draws_its_figures(page):
    page, errors = page
    step = page.locator(STEP)
    step.scroll_into_view_if_needed()
    assert step.get_by_text("independent units").count() == 1
    assert step.locator(".ld-fleet-summary table").count() == 0      # nothing simulated yet
    step.get_by_role("button", name="Simulate the fleet").click()
    step.locator(".ld-fleet-summary table").wait_for(timeout=90_000)
    deadline = time.time() + 30
    while step.locator(".ld-fleet-plot canvas").count() < 3 and time.time() < deadline:
        page.wait_for_timeout(200)
    # failures per period, spares, warranty claims (no costs in this scenario: no cost-rate curve)
    assert step.locator(".ld-fleet-plot").count() == 3
    summary = step.locator(".ld-fleet-summary table").inner_text()
    assert "spares for a 95% service level" in summary and "warranty claims in all" in summary
    shot(page, "fleet-01-warranty")
    assert errors == []


def test_costs_add_the_replacement_age_curve(page):
    page, errors = page
    step = page.locator(STEP)
    step.scroll_into_view_if_needed()
    for label, value in (("Planned replacement cost", "300"), ("Failure replacement cost", "2000")):
        field = step.get_by_label(label)
        field.fill(value)
        field.press("Enter")
    step.get_by_role("button", name="Simulate the fleet").click()
    deadline = time.time() + 90
    while step.locator(".ld-fleet-plot").count() < 4 and time.time() < deadline:
        page.wait_for_timeout(200)
    assert step.locator(".ld-fleet-plot").count() == 4
    assert "run to failure" in step.locator(".ld-fleet-summary table").inner_text()
    shot(page, "fleet-02-costs")
    assert errors == []


def test_a_bad_setting_is_explained_next_to_the_step(page):
    page, errors = page
    step = page.locator(STEP)
    step.scroll_into_view_if_needed()
    sales = step.get_by_label("Units sold per period")
    sales.fill("60, lots")
    sales.press("Enter")
    step.get_by_role("button", name="Simulate the fleet").click()
    step.get_by_text("fleet.sales: value 2 ('lots') is not a number").wait_for(timeout=20_000)
    assert errors == []
