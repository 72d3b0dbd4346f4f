"""Signing in as a person, when the record has users (`reagentplan.record.users`).

Every request must then come from a signed-in person, loopback included:

- people sign in on the dashboard's own page (``/signin``), which sets a signed,
  expiring session cookie (Flask's session; the signing key is kept in the record, so it
  survives restarts and is the same for every dashboard on the record);
- scripts send a person's name and password as HTTP Basic credentials with each request
  (checked through a short in-memory memo of successful checks, so that a script
  posting every second does not pay the slow hash each time).

Failed sign-ins (page or Basic) are slowed and then locked out per person and per
address (`dashboard.security.LoginThrottle`, keyed ``user:NAME`` and ``addr:ADDRESS``).

Roles are enforced here, before any callback runs, never only by hiding buttons:
`required_role` names the role a request needs.  A Dash callback that records facts,
re-plans, downloads or takes a workbook needs a coordinator; `/api/v1/record` needs a
coordinator; `/api/v1/users` an admin; everything else a viewer.  A refused callback is
answered with its own message line saying why (HTTP 403 for anything else).

A session ends after `SESSION_HOURS` without a request, at the latest `MAX_SESSION_HOURS`
after signing in, when the person is removed or their password changed, or at
"Sign out".
"""

from __future__ import annotations

import hashlib
import hmac
import html
import json
import math
import secrets
import threading
import time
from datetime import timedelta

from reagentplan.record.users import Person, allows

from .security import LoginThrottle
from .views import controls as C
from .views import record as R

SESSION_HOURS = 8
MAX_SESSION_HOURS = 24
COOKIE = "reagentplan_session"
SIGNIN = "/signin"
SIGNOUT = "/signout"
#: How long a looked-up person or a successful Basic check is trusted [s].
PERSON_TTL_S = 5.0
BASIC_TTL_S = 60.0
REALM = "reagentplan"

#: Dash callbacks that change something, by an output they write: (output, the message
#: line the refusal is shown in, what it does in words).  A coordinator may run them.
COORDINATOR_CALLBACKS = (
    ("plan-id.data", C.REPLAN_MESSAGE, "re-plan"),
    (f"{C.DOWNLOAD}.data", C.DOWNLOAD_MESSAGE, "download plans"),
    ("scenario-id.data", C.UPLOAD_MESSAGE, "load a workbook"),
    (f"{R.UPLOAD_MESSAGE}.children", R.UPLOAD_MESSAGE, "record facts"),
)


def current_person() -> Person | None:
    """The person the current request was made by (None outside a request or without
    users)."""
    from flask import g, has_request_context

    return getattr(g, "person", None) if has_request_context() else None


def current_name() -> str | None:
    p = current_person()
    return p.name if p is not None else None


class People:
    """The record's users as the dashboard checks them: lookups and password checks
    with short memos (thread-safe)."""

    def __init__(self, url: str):
        from reagentplan.record.db import connect

        self.engine = connect(url)
        self._lock = threading.Lock()
        self._people: dict[str, tuple[float, Person | None]] = {}
        self._basic: dict[bytes, tuple[float, Person]] = {}
        self._salt = secrets.token_bytes(16)

    def secret(self) -> str:
        from reagentplan.record.users import app_secret

        return app_secret(self.engine)

    def person(self, name: str) -> Person | None:
        from reagentplan.record.users import person

        now = time.monotonic()
        with self._lock:
            hit = self._people.get(name)
            if hit is not None and now - hit[0] < PERSON_TTL_S:
                return hit[1]
        found = person(self.engine, name)
        with self._lock:
            self._people[name] = (now, found)
            if len(self._people) > 10_000:
                self._people.clear()
        return found

    def verify(self, name: str, password: str) -> Person | None:
        """The person when the password is right (the slow hash, or the memo of a
        recent success with the same name and password)."""
        from reagentplan.record.users import verify

        key = hmac.new(self._salt, f"{name}\0{password}".encode("utf-8", "surrogatepass"),
                       hashlib.sha256).digest()
        now = time.monotonic()
        with self._lock:
            hit = self._basic.get(key)
        if hit is not None and now - hit[0] < BASIC_TTL_S:
            current = self.person(name)  # removed or given a new password: not trusted
            if current is not None and current.stamp == hit[1].stamp:
                return current
        found = verify(self.engine, name, password)
        with self._lock:
            if found is not None:
                self._basic[key] = (now, found)
                if len(self._basic) > 10_000:
                    self._basic.clear()
            else:
                self._basic.pop(key, None)
        return found


def required_role(path: str, method: str, body: dict | None) -> tuple[str, str | None, str]:
    """``(role, message output, what)`` a request needs: ``message output`` is the Dash
    output a refusal is written to (None: answer 403)."""
    if path.startswith("/api/v1/users"):
        return "admin", None, "manage users"
    if path.startswith("/api/v1/record") and method == "POST":
        return "coordinator", None, "record facts"
    if path.endswith("/_dash-update-component") and isinstance(body, dict):
        output = str(body.get("output", ""))
        for written, message, what in COORDINATOR_CALLBACKS:
            if written in output:
                return "coordinator", message, what
    return "viewer", None, "see the views"


def _signin_page(message: str = "", status: int = 200, name: str = ""):
    from flask import Response

    note = f'<p class="bad" id="signin-message">{html.escape(message)}</p>' if message else ""
    page = f"""<!doctype html><html lang="en"><head><meta charset="utf-8">
<title>Sign in · reagentplan</title><meta name="viewport" content="width=device-width">
<style>body{{font-family:system-ui,sans-serif;background:#1f2a30;color:#eee;display:flex;
justify-content:center;align-items:center;height:100vh;margin:0}}form{{background:#2b3940;
padding:28px 32px;border-radius:8px;min-width:280px}}label{{display:block;margin:12px 0 4px}}
input{{width:100%;padding:8px;box-sizing:border-box}}button{{margin-top:18px;padding:8px 18px}}
.bad{{color:#f2a08c}}h1{{font-size:18px;color:#d9a441}}</style></head><body>
<form method="post" action="{SIGNIN}" id="signin-form"><h1>reagentplan · sign in</h1>{note}
<label for="signin-name">Name</label><input id="signin-name" name="name" autocomplete="username"
 value="{html.escape(name)}" required autofocus>
<label for="signin-password">Password</label><input id="signin-password" name="password"
 type="password" autocomplete="current-password" required>
<button type="submit" id="signin-button">Sign in</button></form></body></html>"""
    return Response(page, status, {"Content-Type": "text/html; charset=utf-8", "Cache-Control": "no-store"})


def _banner(person: Person) -> str:
    return (f'<div id="rp-signed-in" style="position:fixed;top:4px;right:10px;z-index:1000;font:12px '
            f'system-ui,sans-serif;color:#ccc">Signed in as <b id="rp-signed-in-name">'
            f'{html.escape(person.name)}</b> ({html.escape(person.role)}) '
            f'<form method="post" action="{SIGNOUT}" style="display:inline"><button id="rp-sign-out" '
            f'style="font-size:11px">Sign out</button></form></div>')


def install_people_auth(app, people: People, throttle: LoginThrottle | None = None) -> LoginThrottle:
    """Ask every request of the Dash ``app`` for a signed-in person (session cookie or
    HTTP Basic) with the role it needs.  Registered first, so it runs before anything
    else but the body limit (see `dashboard.app.create_app`).  Returns the throttle."""
    from flask import Response, g, redirect, request, session

    server = app.server
    throttle = throttle or LoginThrottle()
    server.secret_key = people.secret()
    server.config.update(SESSION_COOKIE_NAME=COOKIE, SESSION_COOKIE_HTTPONLY=True,
                         SESSION_COOKIE_SAMESITE="Lax",
                         PERMANENT_SESSION_LIFETIME=timedelta(hours=SESSION_HOURS))

    def too_many(keys: list[str]):
        wait = max(throttle.retry_after(k) for k in keys)
        locked = any(throttle.locked(k) for k in keys)
        secs = max(1, math.ceil(wait))
        text = (f"Too many failed sign-ins: locked out for {secs} s." if locked
                else f"Too many failed sign-ins: try again in {secs} s.")
        return text, secs

    def check_password(name: str, password: str) -> tuple[Person | None, str | None, int]:
        """``(person, refusal, retry-after)``: counted per person and per address."""
        keys = [f"addr:{request.remote_addr or 'unknown'}", f"user:{name[:200]}"]
        if any(throttle.retry_after(k) > 0 for k in keys):
            text, secs = too_many(keys)
            return None, text, secs
        found = people.verify(name, password)
        if found is None:
            for k in keys:
                throttle.failed(k)
            if any(throttle.locked(k) for k in keys):
                text, secs = too_many(keys)
                return None, text, secs
            return None, "Wrong name or password.", 0
        for k in keys:
            throttle.succeeded(k)
        return found, None, 0

    def signin():
        if request.method == "GET":
            return _signin_page()
        name = (request.form.get("name") or "").strip()
        password = request.form.get("password") or ""
        found, refusal, secs = check_password(name, password)
        if found is None:
            return _signin_page(refusal or "Wrong name or password.", 429 if secs else 401, name[:200])
        session.clear()
        session.permanent = True
        session.update(name=found.name, stamp=found.stamp, at=time.time())
        return redirect("/", 303)

    def signout():
        session.clear()
        return redirect(SIGNIN, 303)

    server.add_url_rule(SIGNIN, "reagentplan_signin", signin, methods=["GET", "POST"])
    server.add_url_rule(SIGNOUT, "reagentplan_signout", signout, methods=["POST"])
    challenge = {"WWW-Authenticate": f'Basic realm="{REALM}", charset="UTF-8"'}

    def _unsigned(path: str):
        if path.startswith("/api/"):
            return Response(json.dumps({"error": "unauthorized", "message":
                                        "Sign in: send a person's name and password as HTTP Basic "
                                        "credentials."}), 401,
                            {"Content-Type": "application/json", **challenge})
        if request.method == "GET" and not path.startswith("/_"):
            return redirect(SIGNIN, 303)
        return Response("Signed out: reload the page to sign in again.\n", 401)

    def _check():
        path = request.path
        if path in (SIGNIN, SIGNOUT):
            return None
        auth = request.authorization
        g.person = None
        if auth is not None and auth.type == "basic":
            found, refusal, secs = check_password(auth.username or "", auth.password or "")
            if found is None:
                if secs:
                    return Response(json.dumps({"error": "too_many", "message": refusal}), 429,
                                    {"Content-Type": "application/json", "Retry-After": str(secs)})
                return Response(json.dumps({"error": "unauthorized", "message": refusal}), 401,
                                {"Content-Type": "application/json", **challenge})
            g.person, g.by_basic = found, True
        else:
            name, stamp, at = session.get("name"), session.get("stamp"), session.get("at", 0)
            found = people.person(name) if isinstance(name, str) else None
            if (found is None or found.stamp != stamp
                    or time.time() - float(at) > MAX_SESSION_HOURS * 3600):
                session.clear()
                return _unsigned(path)
            g.person, g.by_basic = found, False
        body = request.get_json(silent=True, cache=True) if request.method == "POST" and \
            path.endswith("/_dash-update-component") else None
        role, message, what = required_role(path, request.method, body)
        if allows(g.person.role, role):
            return None
        text = (f"{g.person.name} is a {g.person.role}: only a {role} or above may {what}. "
                "Nothing was changed.")
        if message is not None:  # shown on the page where the button is
            return Response(json.dumps({"multi": True, "response": {
                message: {"children": text, "className": "rp-msg bad"}}}), 200,
                {"Content-Type": "application/json"})
        if path.startswith("/api/"):
            return Response(json.dumps({"error": "forbidden", "message": text}), 403,
                            {"Content-Type": "application/json"})
        return Response(text + "\n", 403)

    server.before_request_funcs.setdefault(None, []).insert(0, _check)

    original = app.interpolate_index

    def interpolate_index(**kwargs):
        page = original(**kwargs)
        person = current_person()
        if person is None:
            return page
        return page.replace("<body>", "<body>" + _banner(person), 1)

    app.interpolate_index = interpolate_index
    return throttle
