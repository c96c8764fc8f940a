"""Slider-release-to-redraw latency of the drawing board, measured in a real browser (headless Chromium).
Median and 95th percentile over repeated drags of a parameter slider; not part of `make test`.

The app writes ``data-version`` on a marker element in the same grouped update
(``pn.io.hold``) as the live plots, so the marker changing in the page is the
plots arriving. A requestAnimationFrame loop in the page timestamps each change
with ``performance.now()``; a capturing ``pointerup`` listener timestamps the
release; latency is the difference, both read from the same clock.

    .venv/bin/python -m bench.dashboard_latency [--trials 25] [--scenario gearbox-wearout]
                                                [--batch 50000] [--streaming]
"""
from __future__ import annotations

import argparse
import os
import socket
import statistics
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync"]

# Finds the marker through Panel's shadow roots, remembering the root that held it.
MONITOR_JS = r"""
() => {
  const deep = (root, sel) => {
    const hit = root.querySelector(sel);
    if (hit) return hit;
    for (const el of root.querySelectorAll('*')) {
      if (el.shadowRoot) { const f = deep(el.shadowRoot, sel); if (f) return f; }
    }
    return null;
  };
  const ld = window.__ld = {changes: [], ups: [], root: null, last: null};
  window.addEventListener('pointerup', () => ld.ups.push(performance.now()), true);
  const frame = () => {
    let el = ld.root ? ld.root.querySelector('.ld-redraw') : null;
    if (!el) { el = deep(document, '.ld-redraw'); ld.root = el ? el.getRootNode() : null; }
    const v = el ? el.getAttribute('data-version') : null;
    if (v !== ld.last) { ld.changes.push([performance.now(), v]); ld.last = v; }
    requestAnimationFrame(frame);
  };
  requestAnimationFrame(frame);
}
"""


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_server(port: int, scenario: str, log_path: str | None = None) -> subprocess.Popen:
    code = f"from dashboard.app import serve; serve(port={port}, scenario={scenario!r})"
    sink = open(log_path, "w") if log_path else subprocess.DEVNULL
    env = dict(os.environ, LIFEDRAW_DEBUG="1") if log_path else None
    proc = subprocess.Popen([sys.executable, "-c", code], cwd=ROOT, stdout=sink, stderr=sink, env=env)
    deadline = time.time() + 60
    while time.time() < deadline:
        try:
            urllib.request.urlopen(f"http://127.0.0.1:{port}/liveness", timeout=1)
        except urllib.error.HTTPError:
            return proc          # the server answers (404 on an unknown path is an answer)
        except OSError:
            time.sleep(0.3)
            continue
        return proc
    proc.kill()
    raise RuntimeError("the dashboard server did not start within 60 s")


def percentile(values, q):
    xs = sorted(values)
    k = (len(xs) - 1) * q
    lo, hi = int(k), min(int(k) + 1, len(xs) - 1)
    return xs[lo] + (k - lo) * (xs[hi] - xs[lo])


def measure(url: str, trials: int, batch: int, streaming: bool, param: str | None, warmup: int = 2) -> list[float]:
    from playwright.sync_api import sync_playwright

    out = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1360, "height": 1000})
        page.goto(url)
        page.wait_for_selector(".ld-redraw", timeout=60_000)
        batch_select = page.locator(".ld-step-2 select").nth(2)
        batch_select.select_option(label=f"{batch:,}")
        page.wait_for_timeout(1500)
        if streaming:
            stop_after = page.locator(".ld-step-2 input").nth(1)     # "Stop after (draws)"
            stop_after.fill("50000000")
            stop_after.press("Enter")
            page.wait_for_timeout(500)
            page.get_by_role("button", name="▶ Start").click()
        sliders = page.locator(".ld-step-1 .noUi-handle")
        handle = page.locator(f".ld-slider-{param} .noUi-handle") if param else sliders.first
        handle.scroll_into_view_if_needed()
        page.evaluate(MONITOR_JS)
        page.wait_for_timeout(500)
        for i in range(warmup + trials):
            box = handle.bounding_box()
            x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
            before = page.evaluate("() => [window.__ld.changes.length, window.__ld.ups.length]")
            dx = 25 if i % 2 == 0 else -25
            page.mouse.move(x, y)
            page.mouse.down()
            page.mouse.move(x + dx, y, steps=4)
            page.mouse.up()
            page.wait_for_function(f"() => window.__ld.changes.length > {before[0]}", timeout=10_000)
            change, up = page.evaluate(
                f"() => [window.__ld.changes[{before[0]}][0], window.__ld.ups[{before[1]}]]")
            if i >= warmup:         # the first releases also pay for first-use set-up in the server
                out.append(change - up)
            page.wait_for_timeout(700)      # let the follow-up tick (geometry, life figures) settle
        browser.close()
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=25)
    ap.add_argument("--warmup", type=int, default=2, help="releases measured but not counted (default 2)")
    ap.add_argument("--scenario", default="gearbox-wearout")
    ap.add_argument("--param", default=None, help="parameter whose slider to drag (default: the first)")
    ap.add_argument("--batch", type=int, default=50_000, choices=[10_000, 20_000, 50_000, 100_000, 200_000])
    ap.add_argument("--streaming", action="store_true", help="drag while the stream is drawing batches")
    ap.add_argument("--server-log", default=None, help="write the server's log (with timings) to this file")
    ap.add_argument("--json", action="store_true", help="end with one JSON line (for bench/run.py)")
    args = ap.parse_args(argv)
    port = free_port()
    server = start_server(port, args.scenario, args.server_log)
    try:
        ms = measure(f"http://127.0.0.1:{port}/", args.trials, args.batch, args.streaming, args.param,
                     args.warmup)
    finally:
        server.terminate()
        server.wait(timeout=10)
    load = ", ".join(f"{v:.1f}" for v in os.getloadavg())
    print(f"scenario {args.scenario}, batch {args.batch:,}, {'streaming' if args.streaming else 'paused'}, "
          f"{len(ms)} slider releases after {args.warmup} warm-up; {os.cpu_count()} CPUs, load average {load}")
    print(f"release -> redraw: median {statistics.median(ms):.0f} ms, p95 {percentile(ms, 0.95):.0f} ms, "
          f"min {min(ms):.0f} ms, max {max(ms):.0f} ms")
    if args.json:
        import json
        print(json.dumps({"median_ms": statistics.median(ms), "p95_ms": percentile(ms, 0.95),
                          "batch": args.batch, "streaming": args.streaming, "trials": len(ms)}))
    return 0


if __name__ == "__main__":
    sys.exit(main())
