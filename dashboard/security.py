"""Who may reach the dashboard.

- By default it binds to 127.0.0.1, reachable from this machine only.
- Any other address needs a password in the environment variable
  ``REAGENTPLAN_DASHBOARD_PASSWORD``; without one the dashboard refuses to start.  The
  password is asked for with HTTP basic auth (any user name) on every request.  When
  the variable is set, a loopback dashboard asks for it too.
- The browser never names a file on the server: the workbook path is a command-line
  argument only, uploads are parsed in memory, and the page refers to scenarios and
  plans by random ids (`dashboard.store`).

Basic auth sends the password with every request, readable by anyone on the path
unless the connection is encrypted: outside a trusted network, put the dashboard behind
a TLS-terminating proxy.

Requests that change anything (every Dash callback is a POST: uploads, re-plans,
downloads; the record's actuals later) are taken only from the dashboard's own page:
their ``Origin`` (or, without one, ``Referer``) must name the host the request was sent
to, or an origin listed in ``REAGENTPLAN_DASHBOARD_ORIGINS``.  A page on another site
cannot make the browser post to the dashboard with the credentials it remembers.
Without a password the ``Host`` must be a loopback name too, so a hostile page cannot
reach a loopback dashboard by rebinding its own domain name to 127.0.0.1.

Failed sign-ins are slowed and then locked out per client address (`LoginThrottle`).
Behind a proxy, start the dashboard with ``--trusted-proxy`` so the address is the
client's, not the proxy's.
"""

from __future__ import annotations

import hmac
import ipaddress
import math
import threading
import time
from collections import OrderedDict
from collections.abc import Callable, Iterable, Mapping
from urllib.parse import urlsplit

PASSWORD_ENV = "REAGENTPLAN_DASHBOARD_PASSWORD"
ORIGINS_ENV = "REAGENTPLAN_DASHBOARD_ORIGINS"
#: Methods that never change anything on the server.
SAFE_METHODS = ("GET", "HEAD", "OPTIONS")
DEFAULT_HOST = "127.0.0.1"
REALM = "reagentplan dashboard"


class DashboardRefused(Exception):
    """The dashboard will not start as asked; the message says why and what to do."""


def is_loopback(host: str) -> bool:
    """True for ``localhost`` and addresses in 127.0.0.0/8 or ::1."""
    name = host.strip().strip("[]").lower()
    if name == "localhost":
        return True
    try:
        return ipaddress.ip_address(name).is_loopback
    except ValueError:
        return False


def password_for(host: str, environ: Mapping[str, str]) -> str | None:
    """The password the dashboard must ask for on ``host``, or ``None`` for none.

    Raises `DashboardRefused` for a non-loopback host without a password.
    """
    password = environ.get(PASSWORD_ENV) or None
    if password is None and not is_loopback(host):
        raise DashboardRefused(
            f"Refusing to serve the dashboard on {host}: that address can be reached from "
            f"other machines, and no password is set. Set the environment variable "
            f"{PASSWORD_ENV} to a password (the browser will ask for it, any user name), "
            f"or leave out --host to serve on {DEFAULT_HOST}, this machine only.")
    return password


class LoginThrottle:
    """Failed sign-ins per client address: slowed, then locked out for a while.

    The first ``free`` failures cost nothing (typing errors).  After each further one the
    address must wait ``delay(n)`` seconds (1, 2, 4, ... up to ``max_delay``) before its
    next attempt is even checked; attempts in that wait are answered 429 without looking
    at the password, so nothing is learnt from them and no server thread sleeps.  After
    ``lock_after`` failures within ``window`` seconds the address is locked out for
    ``lockout`` seconds, right password or not.  A successful sign-in clears the
    address.  At most ``max_clients`` addresses are tracked (the oldest are dropped).

    ``clock`` is the time source [s] (``time.monotonic``).
    """

    def __init__(self, free: int = 3, lock_after: int = 10, window: float = 900.0,
                 lockout: float = 900.0, max_delay: float = 30.0, max_clients: int = 10_000,
                 clock: Callable[[], float] = time.monotonic):
        self.free, self.lock_after, self.window = free, lock_after, window
        self.lockout, self.max_delay, self.max_clients = lockout, max_delay, max_clients
        self.clock = clock
        self._lock = threading.Lock()
        self._clients: OrderedDict[str, list[float]] = OrderedDict()  # failures, first, wait until

    def delay(self, failures: int) -> float:
        """Seconds to wait after ``failures`` failures [s]."""
        if failures <= self.free:
            return 0.0
        return min(self.max_delay, 2.0 ** (failures - self.free - 1))

    def retry_after(self, client: str) -> float:
        """Seconds before ``client`` may try again (0 = now)."""
        now = self.clock()
        with self._lock:
            state = self._clients.get(client)
            if state is None:
                return 0.0
            failures, first, until = state
            if now - first > self.window and now >= until:
                del self._clients[client]
                return 0.0
            return max(0.0, until - now)

    def locked(self, client: str) -> bool:
        with self._lock:
            state = self._clients.get(client)
            return state is not None and state[0] >= self.lock_after and self.clock() < state[2]

    def failed(self, client: str) -> float:
        """Record a failure; return the seconds the client must now wait."""
        now = self.clock()
        with self._lock:
            state = self._clients.pop(client, None)
            if state is None or (now - state[1] > self.window and now >= state[2]):
                state = [0, now, now]
            state[0] += 1
            wait = self.lockout if state[0] >= self.lock_after else self.delay(state[0])
            state[2] = now + wait
            self._clients[client] = state
            while len(self._clients) > self.max_clients:
                self._clients.popitem(last=False)
            return wait

    def succeeded(self, client: str) -> None:
        with self._lock:
            self._clients.pop(client, None)


def install_basic_auth(server, password: str, throttle: LoginThrottle | None = None) -> LoginThrottle:
    """Ask for ``password`` (HTTP basic auth, any user name) before every request of the
    Flask ``server``, with failed attempts slowed and locked out per client address.
    Registered first, so it runs before anything else.  Returns the throttle."""
    from flask import Response, request

    expected = password.encode("utf-8")
    throttle = throttle or LoginThrottle()
    challenge = {"WWW-Authenticate": f'Basic realm="{REALM}", charset="UTF-8"'}

    def _too_many(wait: float, locked: bool):
        secs = max(1, math.ceil(wait))
        text = (f"Too many failed sign-ins from this address: locked out for {secs} s.\n" if locked
                else f"Too many failed sign-ins from this address: try again in {secs} s.\n")
        return Response(text, 429, {"Retry-After": str(secs)})

    def _check():
        client = request.remote_addr or "unknown"
        auth = request.authorization
        given = (auth.password or "") if auth is not None and auth.type == "basic" else ""
        wait = throttle.retry_after(client)
        if wait > 0 and (given or throttle.locked(client)):
            return _too_many(wait, throttle.locked(client))
        if not given:
            return Response("Sign in to the reagentplan dashboard (any user name).\n", 401, challenge)
        if not hmac.compare_digest(given.encode("utf-8"), expected):
            wait = throttle.failed(client)
            if throttle.locked(client):
                return _too_many(wait, True)
            return Response("Wrong password. Sign in to the reagentplan dashboard (any user "
                            "name).\n", 401, challenge)
        throttle.succeeded(client)
        return None

    server.before_request_funcs.setdefault(None, []).insert(0, _check)
    return throttle


def _netloc(url_or_host: str, scheme: str = "http") -> tuple[str, int] | None:
    """(host, port) of an origin, URL or Host header, default ports filled in."""
    text = url_or_host.strip()
    if not text or text == "null":
        return None
    if "//" not in text:
        text = f"{scheme}://{text}"
    try:
        parts = urlsplit(text)
        port = parts.port
    except ValueError:
        return None
    if not parts.hostname:
        return None
    if port is None:
        port = 443 if parts.scheme == "https" else 80
    return parts.hostname.lower(), port


def _from_script(request) -> bool:
    """A request of the HTTP interface made by a script, not a browser: to ``/api/``,
    with its own credentials (an ``Authorization`` header, never the session cookie),
    and no ``Origin``, ``Referer`` or cross-site ``Sec-Fetch-Site`` (every browser sends
    an ``Origin`` with a cross-site POST)."""
    return (request.path.startswith("/api/") and "Authorization" in request.headers
            and not request.headers.get("Origin") and not request.headers.get("Referer")
            and request.headers.get("Sec-Fetch-Site", "none") in ("none", "same-origin"))


def install_origin_check(server, *, loopback_only: bool, origins: Iterable[str] = (),
                         scripts: bool = False) -> None:
    """Refuse (403) any request that may change state unless it comes from the
    dashboard's own page, and, with ``loopback_only``, any request whose ``Host`` is
    not a loopback name.

    A request whose method is not GET/HEAD/OPTIONS must carry an ``Origin`` (or, when
    the browser sends none, a ``Referer``) naming the request's own host and port, or
    one of ``origins`` (e.g. ``https://plant.example`` for a proxy that rewrites the
    host).  With ``scripts``, a request of the HTTP interface from a script (`_from_script`)
    may carry neither.
    """
    from flask import Response, request

    extra = {n for n in (_netloc(o, "https") for o in origins) if n is not None}

    def _check():
        host = request.host or ""
        own = _netloc(host, request.scheme)
        if loopback_only and (own is None or not is_loopback(own[0])):
            return Response("This dashboard answers only on this machine's loopback address.\n", 403)
        if request.method in SAFE_METHODS:
            return None
        if scripts and _from_script(request):
            return None
        source = request.headers.get("Origin") or request.headers.get("Referer") or ""
        claimed = _netloc(source, request.scheme)
        same = claimed == own
        if not same and claimed is not None and own is not None and ":" not in host.rsplit("]", 1)[-1]:
            # a Host without a port (a proxy in front): the page may be on https while
            # the request reaches the dashboard on http; the default ports are the same site
            same = claimed[0] == own[0] and claimed[1] in (80, 443)
        if claimed is None or (not same and claimed not in extra):
            return Response("Refused: this request did not come from the dashboard's own page "
                            "(its Origin or Referer names another site, or none).\n", 403)
        return None

    # installed first of the three and inserted at the front, it runs after the body
    # limit and the password (see dashboard.app.create_app)
    server.before_request_funcs.setdefault(None, []).insert(0, _check)


def install_body_limit(server, limit: int) -> None:
    """Refuse (413) a request whose declared body is over ``limit`` bytes before any of
    it is read; Flask's ``MAX_CONTENT_LENGTH`` bounds bodies sent without a length."""
    from flask import Response, request

    server.config["MAX_CONTENT_LENGTH"] = limit

    def _check():
        n = request.content_length
        if n is not None and n > limit:
            return Response(f"Refused: the request is {n / 2**20:.1f} MB; the dashboard takes at "
                            f"most {limit / 2**20:.0f} MB.\n", 413)
        return None

    server.before_request_funcs.setdefault(None, []).insert(0, _check)


def install_headers(server) -> None:
    """Headers that keep the page out of frames and stop content sniffing."""

    @server.after_request
    def _headers(response):
        response.headers.setdefault("X-Content-Type-Options", "nosniff")
        response.headers.setdefault("X-Frame-Options", "DENY")
        # same-origin: the page's own requests keep their Origin (no-referrer would
        # send "Origin: null" on its POSTs), other sites learn nothing
        response.headers.setdefault("Referrer-Policy", "same-origin")
        response.headers.setdefault("Cross-Origin-Resource-Policy", "same-origin")
        return response
