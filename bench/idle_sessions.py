"""What open tabs cost the drawing board server (issue 14, item 5): CPU of idle tabs, the time a new page
takes to open while other tabs stream, and how soon a closed tab's session is released.

Measured with real browser tabs (headless Chromium, one browser, one page per
tab) against a server in a subprocess. CPU is the server process's own CPU time
(user + system, from the OS) over a wall-clock window, in percent of one core,
so other load on the machine slows the numbers down but does not add to them.
A page counts as open when its last cell and its first batch marker are drawn.
Release is read from the server's log line for a destroyed session.

    .venv/bin/python -m bench.idle_sessions [--idle-tabs 10] [--streaming-tabs 6] [--window 20]

Goals from the issue: 10 idle tabs < 5 % CPU; a new page in < 6 s while 6 tabs stream.
"""
from __future__ import annotations

import argparse
import os
import re
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import psutil

ROOT = Path(__file__).resolve().parent.parent
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync"]
RELEASED = re.compile(r"session .* released")


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_server(log_path: Path):
    port = free_port()
    code = f"from lifedraw.dashboard.app import serve; serve(port={port})"
    log = open(log_path, "wb")
    proc = subprocess.Popen([sys.executable, "-c", code], cwd=ROOT, stdout=log, stderr=log)
    url = f"http://127.0.0.1:{port}/"
    for _ in range(300):
        try:
            urllib.request.urlopen(url, timeout=10).close()
            return proc, url
        except OSError:
            time.sleep(0.3)
    proc.kill()
    raise SystemExit("the server did not start")


def open_page(browser, url: str) -> tuple:
    page = browser.new_page(viewport={"width": 1360, "height": 1000})
    page.route("**/*", lambda r: r.continue_() if r.request.url.startswith(
        ("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:")) else r.abort())
    start = time.perf_counter()
    page.goto(url)
    page.wait_for_selector(".ld-step-8", timeout=180_000)
    page.wait_for_selector(".ld-redraw", timeout=180_000)
    return page, time.perf_counter() - start


def cpu_percent(proc: psutil.Process, seconds: float) -> float:
    """The process tree's CPU time over ``seconds`` of wall clock, in percent of one core."""
    def total():
        procs = [proc, *proc.children(recursive=True)]
        return sum(p.cpu_times().user + p.cpu_times().system for p in procs if p.is_running())
    before, t0 = total(), time.perf_counter()
    time.sleep(seconds)
    return 100.0 * (total() - before) / (time.perf_counter() - t0)


def draws_so_far(page) -> int:
    """The draw count the page shows on its batch marker ("... · N draws")."""
    text = page.locator(".ld-redraw").inner_text()
    return int(re.search(r"([\d,]+) draws", text).group(1).replace(",", ""))


def stream(page) -> None:
    """Let the tab stream for a long time: the largest stop, then Start."""
    stop = page.locator(".ld-step-2 input").nth(1)
    stop.fill("50000000")
    stop.press("Enter")
    page.wait_for_timeout(500)
    page.locator(".ld-step-2 button", has_text="Start").click()


def say(line: str) -> None:
    print(line, flush=True)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--idle-tabs", type=int, default=10)
    parser.add_argument("--streaming-tabs", type=int, default=6)
    parser.add_argument("--window", type=float, default=20.0, help="seconds of each CPU measurement")
    args = parser.parse_args(argv)
    from playwright.sync_api import sync_playwright

    load = os.getloadavg()
    say(f"machine: {os.cpu_count()} cores, load average {load[0]:.1f} / {load[1]:.1f} / {load[2]:.1f} at the start")
    log_path = Path(tempfile.mkdtemp(prefix="lifedraw-bench-")) / "server.log"
    proc, url = start_server(log_path)
    server = psutil.Process(proc.pid)
    results = {}
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS)
            pages, opened = [], []
            for _ in range(args.idle_tabs):
                page, seconds = open_page(browser, url)
                pages.append(page)
                opened.append(seconds)
            time.sleep(5)     # the first batch and its follow-up updates
            results["idle_cpu"] = cpu_percent(server, args.window)
            results["idle_open_s"] = opened
            say(f"{args.idle_tabs} idle tabs: server CPU {results['idle_cpu']:.1f} % of one core (goal < 5 %); "
                f"pages opened in {min(opened):.1f}-{max(opened):.1f} s")

            released_before = len(RELEASED.findall(log_path.read_text(errors="replace")))
            closed_at = time.perf_counter()
            for page in pages:
                page.close()
            release = None
            while time.perf_counter() - closed_at < 60:
                if len(RELEASED.findall(log_path.read_text(errors="replace"))) >= released_before + len(pages):
                    release = time.perf_counter() - closed_at
                    break
                time.sleep(0.2)
            results["release_s"] = release
            say(f"closing them: all sessions released after {release:.1f} s" if release is not None else
                "closing them: not all sessions were released within 60 s")
            results["after_close_cpu"] = cpu_percent(server, min(args.window, 10))
            say(f"after closing: server CPU {results['after_close_cpu']:.1f} %")

            streaming = []
            for _ in range(args.streaming_tabs):
                page, _ = open_page(browser, url)
                stream(page)
                streaming.append(page)
            time.sleep(5)
            draws = [draws_so_far(page) for page in streaming]
            results["streaming_cpu"] = cpu_percent(server, min(args.window, 10))
            rates = [(draws_so_far(page) - d) / min(args.window, 10) for page, d in zip(streaming, draws)]
            say(f"{args.streaming_tabs} streaming tabs: server CPU {results['streaming_cpu']:.1f} %; "
                f"{sum(rates):,.0f} draws/s in all ({min(rates):,.0f}-{max(rates):,.0f} per tab)")
            newcomers = []
            for _ in range(3):
                page, seconds = open_page(browser, url)
                newcomers.append(seconds)
                say(f"a new page while they stream: {seconds:.1f} s (goal < 6 s)")
                page.close()
                time.sleep(2)
            results["open_while_streaming_s"] = newcomers
            browser.close()
    finally:
        proc.terminate()
        proc.wait(timeout=20)
    load = os.getloadavg()
    say(f"load average at the end {load[0]:.1f} / {load[1]:.1f} / {load[2]:.1f}")

    return 0


if __name__ == "__main__":
    raise SystemExit(main())
