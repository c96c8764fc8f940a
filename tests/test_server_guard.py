"""The page server's front door (issue 14, item 9): a foreign Host gets 421 and no session; new pages
beyond a burst get 429 with Retry-After. References: RFC 9110 §7.2 (Host), §15.5.20 (421 Misdirected
Request); RFC 6585 §4 (429 Too Many Requests, Retry-After); DNS rebinding as the reason to check Host.

The routing is checked on a bare tornado application (which handler a request
reaches), the whole server with raw HTTP requests whose Host header a browser
after DNS rebinding would send.
"""
from __future__ import annotations

import http.client
import re
import time

import pytest
from tornado.httputil import HTTPHeaders, HTTPServerRequest, RequestStartLine
from tornado.web import Application, RequestHandler

from lifedraw.dashboard.host_guard import (RefusedHost, TokenBucket, TooManyNewPages, allowed_host_names,
                                           guard)
from served import drawing_board_server


class Page(RequestHandler):
    def get(self):
        self.write("page")


def _handler(app, host, path="/", method="GET"):
    request = HTTPServerRequest(start_line=RequestStartLine(method, path, "HTTP/1.1"),
                                headers=HTTPHeaders({"Host": host}))
    return app.find_handler(request).handler_class


@pytest.fixture
def app():
    app = Application([(r"/", Page), (r"/static/.*", Page)])
    guard(app, "127.0.0.1", burst=3, interval=1000.0)
    return app


@pytest.mark.parametrize("host", ["evil.example", "evil.example:7263", "127.0.0.1.evil.example",
                                  "localhost.evil.example:80", "xn--localhost-.example"])
def test_a_foreign_host_name_is_refused_on_every_path(app, host):
    assert _handler(app, host) is RefusedHost
    assert _handler(app, host, "/static/js/bokeh.min.js") is RefusedHost
    assert _handler(app, host, "/ws") is RefusedHost


@pytest.mark.parametrize("host", ["127.0.0.1:7263", "localhost:7263", "LOCALHOST", "[::1]:7263", "127.0.0.1",
                                  "10.1.2.3:7263"])
def test_loopback_names_and_ip_literals_are_served(app, host):
    # An IP literal involves no name lookup, so DNS rebinding cannot produce one.
    assert _handler(app, host, "/static/x") is Page


def test_the_address_served_on_is_accepted():
    assert "lab-pc.example" in allowed_host_names("lab-pc.example")
    assert "lab-pc.example" not in allowed_host_names("127.0.0.1")


def test_new_pages_beyond_the_burst_are_refused_until_the_bucket_refills():
    now = [0.0]
    bucket = TokenBucket(burst=3, interval=2.0, clock=lambda: now[0])
    assert [bucket.take() for _ in range(3)] == [0.0, 0.0, 0.0]
    assert bucket.take() == pytest.approx(2.0)          # empty: the next token in one interval
    now[0] += 1.0
    assert bucket.take() == pytest.approx(1.0)
    now[0] += 1.0
    assert bucket.take() == 0.0
    now[0] += 100.0
    assert [bucket.take() for _ in range(4)][-1] > 0    # refilled only up to the burst


def test_the_page_rate_counts_new_pages_only(app):
    assert [_handler(app, "127.0.0.1:1") for _ in range(3)] == [Page] * 3
    assert _handler(app, "127.0.0.1:1") is TooManyNewPages
    assert _handler(app, "127.0.0.1:1", "/static/x") is Page            # scripts and styles still load
    assert _handler(app, "127.0.0.1:1", "/", method="HEAD") is Page


def _get(port, host):
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=120)
    conn.request("GET", "/", headers={"Host": host})
    response = conn.getresponse()
    return response.status, response.read().decode("utf-8", "replace")


def test_the_server_refuses_a_rebound_host_name_before_making_a_session(tmp_path):
    log = tmp_path / "server.log"
    with drawing_board_server(log=log) as url:
        port = int(url.rstrip("/").rsplit(":", 1)[1])
        opened = lambda: len(re.findall(r"session \S+ opened", log.read_text(errors="replace")))
        before = opened()
        status, body = _get(port, "evil.example")
        assert status == 421 and "bokeh" not in body.lower()
        status, _ = _get(port, f"evil.example:{port}")
        assert status == 421
        time.sleep(0.5)
        assert opened() == before, "a foreign Host header made a session"
        status, body = _get(port, f"localhost:{port}")
        assert status == 200 and "bokeh" in body.lower()
        deadline = time.time() + 30
        while opened() == before and time.time() < deadline:
            time.sleep(0.2)
        assert opened() == before + 1
