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
"""

from __future__ import annotations

import hmac
import ipaddress
from collections.abc import Mapping

PASSWORD_ENV = "REAGENTPLAN_DASHBOARD_PASSWORD"
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


def install_basic_auth(server, password: str) -> None:
    """Ask for ``password`` (HTTP basic auth, any user name) before every request of the
    Flask ``server``.  Register before anything else so it runs first."""
    from flask import Response, request

    expected = password.encode("utf-8")

    def _check():
        auth = request.authorization
        given = (auth.password or "") if auth is not None and auth.type == "basic" else ""
        if not given or not hmac.compare_digest(given.encode("utf-8"), expected):
            return Response("Sign in to the reagentplan dashboard (any user name).\n", 401,
                            {"WWW-Authenticate": f'Basic realm="{REALM}", charset="UTF-8"'})
        return None

    server.before_request_funcs.setdefault(None, []).insert(0, _check)


def install_headers(server) -> None:
    """Headers that keep the page out of frames and stop content sniffing."""

    @server.after_request
    def _headers(response):
        response.headers.setdefault("X-Content-Type-Options", "nosniff")
        response.headers.setdefault("X-Frame-Options", "DENY")
        response.headers.setdefault("Referrer-Policy", "no-referrer")
        return response
