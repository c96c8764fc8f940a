"""The page server's front door: only requests naming this machine get in, and new pages at a bounded rate.
Host check against DNS rebinding (RFC 9110 §7.2 Host, §15.5.20 421 Misdirected Request); rate by token bucket.

A web page anywhere can make the browser send requests to 127.0.0.1: through DNS
rebinding (its own host name re-pointed at 127.0.0.1, so the request carries
``Host: <its name>``), or plainly by loading ``http://127.0.0.1:<port>/`` in a
hidden frame. Bokeh checks the ``Origin`` of WebSocket connections only; the
HTTP page itself, whose every request builds a new session, was served to any
``Host``. Here two tornado routing rules go in front of every other route
(``tornado.routing.Rule`` with our own ``Matcher``s, added with the public
``Application.add_handlers``):

- a request whose ``Host`` is not a loopback name, an IP literal (a literal
  involves no DNS, so it cannot be rebound) or a name the user served on is
  answered ``421`` and never reaches Bokeh or Panel;
- a request for a new page (``GET`` of an application path) beyond the token
  bucket's allowance (a burst, then a steady rate) is answered ``429`` with a
  ``Retry-After``, before any session is built.
"""
from __future__ import annotations

import ipaddress
import logging
import math
import socket
import threading
import time

from tornado.routing import Matcher, Rule
from tornado.web import RequestHandler

log = logging.getLogger("lifedraw.dashboard")

#: Host names every server accepts: the loopback names.
LOOPBACK_NAMES = frozenset({"localhost", "localhost.", "127.0.0.1", "[::1]"})
#: New pages: this many at once, then one every NEW_PAGE_INTERVAL_S seconds.
NEW_PAGE_BURST = 8
NEW_PAGE_INTERVAL_S = 2.0
EVERY_INTERFACE = ("0.0.0.0", "::", "")


def allowed_host_names(address: str) -> frozenset[str]:
    """The host names a server bound to ``address`` answers to: the loopback names, the address itself,
    and, when bound to every interface on purpose, this machine's own names."""
    names = set(LOOPBACK_NAMES)
    if address not in EVERY_INTERFACE:
        names.add(address.lower())
    else:
        names |= {socket.gethostname().lower(), socket.getfqdn().lower()}
    return frozenset(names)


def is_ip_literal(host_name: str) -> bool:
    try:
        ipaddress.ip_address(host_name[1:-1] if host_name.startswith("[") else host_name)
        return True
    except ValueError:
        return False


class ForeignHost(Matcher):
    """Matches a request whose ``Host`` header names neither this machine nor an IP address."""

    def __init__(self, names):
        self.names = frozenset(n.lower() for n in names)

    def match(self, request):
        name = request.host_name          # lower-cased, port removed; "[::1]" keeps its brackets
        if name in self.names or is_ip_literal(name):
            return None
        return {}


class TokenBucket:
    """At most ``burst`` events at once, refilled at one per ``interval`` seconds."""

    def __init__(self, burst: int, interval: float, clock=time.monotonic):
        self.burst, self.interval, self.clock = int(burst), float(interval), clock
        self.tokens = float(burst)
        self.stamp = clock()
        self._lock = threading.Lock()

    def take(self) -> float:
        """Take a token: 0.0 if there was one, else the seconds until the next one."""
        with self._lock:
            now = self.clock()
            self.tokens = min(self.burst, self.tokens + (now - self.stamp) / self.interval)
            self.stamp = now
            if self.tokens >= 1.0:
                self.tokens -= 1.0
                return 0.0
            return (1.0 - self.tokens) * self.interval


class NewPageFlood(Matcher):
    """Matches a request for a new page (a session) once the bucket is empty."""

    def __init__(self, page_paths, bucket: TokenBucket):
        self.page_paths = frozenset(page_paths)
        self.bucket = bucket

    def match(self, request):
        if request.method != "GET" or request.path not in self.page_paths:
            return None
        wait = self.bucket.take()
        return None if wait == 0.0 else {"path_kwargs": {"retry_after": f"{wait:.3f}"}}


class RefusedHost(RequestHandler):
    """421 for every method: this server does not serve that host name."""

    def prepare(self):
        log.warning("refused a request for host %r (%s %s)", self.request.host, self.request.method,
                    self.request.path)
        self.set_status(421)
        self.set_header("Content-Type", "text/plain; charset=utf-8")
        self.finish("421 Misdirected Request: this lifedraw server answers to its loopback names only "
                    "(localhost, 127.0.0.1, [::1]) and to the address it was started on.\n")


class TooManyNewPages(RequestHandler):
    """429 with the seconds to wait."""

    def prepare(self):
        retry = max(1, math.ceil(float(self.path_kwargs.get("retry_after", 1.0))))
        log.warning("refused a new page: more than %d at once (retry in %d s)", NEW_PAGE_BURST, retry)
        self.set_status(429)
        self.set_header("Retry-After", str(retry))
        self.set_header("Content-Type", "text/plain; charset=utf-8")
        self.finish(f"429 Too Many Requests: too many new pages in a short time; reload in {retry} s.\n")


def guard(tornado_app, address: str, page_paths=("/", "/autoload.js"), burst: int = NEW_PAGE_BURST,
          interval: float = NEW_PAGE_INTERVAL_S) -> None:
    """Put the host check and the new-page rate in front of every route of ``tornado_app``."""
    bucket = TokenBucket(burst, interval)
    tornado_app.add_handlers(r".*", [
        Rule(ForeignHost(allowed_host_names(address)), RefusedHost),
        Rule(NewPageFlood(page_paths, bucket), TooManyNewPages),
    ])
