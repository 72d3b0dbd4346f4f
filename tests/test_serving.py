"""Serving the dashboard to a network: the production server (waitress), requests that
change state only from the dashboard's own page, failed sign-ins slowed then locked
out per address, the request size limit enforced from the headers.  Everything runs on
127.0.0.1."""

from __future__ import annotations

import base64
import http.client
import json
import os
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

from helpers import minimal_sheets, workbook_bytes, write_workbook
from reagentplan.pipeline import run_plan
from reagentplan.scenario import load_scenario

from reagentplan.dashboard.app import MAX_REQUEST_BYTES, create_app
from reagentplan.dashboard.security import LoginThrottle
from reagentplan.dashboard.testing import serve_in_thread
from reagentplan.dashboard.views import controls as C

ROOT = Path(__file__).resolve().parents[1]
PASSWORD = "s3cret pass"


@pytest.fixture(scope="module")
def small_run():
    return run_plan(load_scenario(workbook_bytes(minimal_sheets())), futures=0, time_limit=20)


@pytest.fixture(scope="module")
def open_app(small_run, tmp_path_factory):
    return create_app(run=small_run, work_dir=tmp_path_factory.mktemp("open"),
                      origins=("https://plant.example",))


def outage_request(app) -> dict:
    """A real callback of the page: the outage dates line (changes nothing)."""
    return {"output": f"{C.OUTAGE_DATES}.children",
            "outputs": {"id": C.OUTAGE_DATES, "property": "children"},
            "inputs": [{"id": C.OUTAGE_RANGE, "property": "value", "value": [0, 3]},
                       {"id": C.OUTAGE_ON, "property": "value", "value": ["on"]}],
            "changedPropIds": [f"{C.OUTAGE_RANGE}.value"],
            "state": [{"id": "scenario-id", "property": "data",
                       "value": app.reagentplan.scenario_id}]}


def post(client, app, headers: dict, **kw):
    return client.post("/_dash-update-component", data=json.dumps(outage_request(app)),
                       headers={"Content-Type": "application/json", **headers}, **kw)


def basic(password: str, user: str = "coordinator") -> dict:
    return {"Authorization": "Basic " + base64.b64encode(f"{user}:{password}".encode()).decode()}


# --------------------------------------------------------------------------- origin


def test_a_post_from_the_dashboards_own_page_is_answered(open_app):
    client = open_app.server.test_client()
    r = post(client, open_app, {"Origin": "http://localhost"})
    assert r.status_code == 200
    assert "Rail closed" in r.get_data(as_text=True)
    r = post(client, open_app, {"Referer": "http://localhost/"})  # a browser sending no Origin
    assert r.status_code == 200
    r = post(client, open_app, {"Origin": "https://plant.example"})  # the proxy's public name
    assert r.status_code == 200


@pytest.mark.parametrize("headers", [
    {"Origin": "http://evil.example"},
    {"Origin": "http://localhost.evil.example"},
    {"Origin": "http://localhost:8051"},          # another port is another origin
    {"Origin": "null"},                            # a sandboxed frame or a data: page
    {"Referer": "http://evil.example/page"},
    {},                                            # neither
])
def test_a_cross_origin_post_is_refused(open_app, headers):
    client = open_app.server.test_client()
    r = post(client, open_app, headers)
    assert r.status_code == 403
    assert "did not come from the dashboard's own page" in r.get_data(as_text=True)


def test_a_cross_origin_post_with_the_password_is_refused(small_run, tmp_path):
    """Basic-auth credentials are sent by the browser automatically: they prove nothing
    about which page sent the request."""
    app = create_app(run=small_run, password=PASSWORD, work_dir=tmp_path / "app",
                     throttle=LoginThrottle())
    client = app.server.test_client()
    assert post(client, app, {**basic(PASSWORD), "Origin": "http://evil.example"}).status_code == 403
    assert post(client, app, {**basic(PASSWORD), "Origin": "http://localhost"}).status_code == 200


def test_behind_a_proxy_the_https_page_may_post_to_its_http_host(small_run, tmp_path):
    """A proxy passing ``Host: plans.example`` (no port) on to http: the page's Origin is
    https://plans.example, the same site; another site still is not."""
    app = create_app(run=small_run, password=PASSWORD, work_dir=tmp_path / "app",
                     throttle=LoginThrottle())
    client = app.server.test_client()
    headers = {**basic(PASSWORD), "Host": "plans.example"}
    assert post(client, app, {**headers, "Origin": "https://plans.example"}).status_code == 200
    assert post(client, app, {**headers, "Origin": "https://plans.example:8443"}).status_code == 403
    assert post(client, app, {**headers, "Origin": "https://evil.example"}).status_code == 403


def test_without_a_password_only_loopback_host_names_are_answered(open_app):
    """A hostile page that rebinds its own name to 127.0.0.1 sends Host: its name."""
    client = open_app.server.test_client()
    assert client.get("/", headers={"Host": "evil.example:8050"}).status_code == 403
    assert client.get("/", headers={"Host": "127.0.0.1:8050"}).status_code == 200
    assert client.get("/", headers={"Host": "[::1]:8050"}).status_code == 200


def test_the_real_server_refuses_a_cross_origin_post(open_app):
    url, stop = serve_in_thread(open_app)
    try:
        port = int(url.rsplit(":", 1)[1].strip("/"))
        body = json.dumps(outage_request(open_app))
        for origin, status in ((f"http://127.0.0.1:{port}", 200), ("http://evil.example", 403)):
            conn = http.client.HTTPConnection("127.0.0.1", port, timeout=30)
            conn.request("POST", "/_dash-update-component", body,
                         {"Content-Type": "application/json", "Origin": origin})
            r = conn.getresponse()
            assert r.status == status, (origin, r.status)
            assert r.getheader("Server") == "reagentplan"  # waitress, not the development server
            conn.close()
    finally:
        stop()


# --------------------------------------------------------------------------- sign-in


class Clock:
    def __init__(self) -> None:
        self.now = 1000.0

    def __call__(self) -> float:
        return self.now


def test_throttle_slows_then_locks_out_and_forgets_after_success():
    clock = Clock()
    t = LoginThrottle(free=3, lock_after=6, window=900, lockout=600, max_delay=30, clock=clock)
    assert [t.failed("a") for _ in range(3)] == [0, 0, 0]      # typing errors cost nothing
    assert t.failed("a") == 1 and t.retry_after("a") == 1      # then 1, 2 s...
    clock.now += 1
    assert t.failed("a") == 2
    clock.now += 2
    assert t.failed("a") == 600 and t.locked("a")              # sixth failure: locked out
    clock.now += 599
    assert t.locked("a") and t.retry_after("a") == pytest.approx(1)
    assert t.retry_after("b") == 0                             # per address
    clock.now += 2
    assert not t.locked("a") and t.retry_after("a") == 0
    t.succeeded("a")
    assert t.failed("a") == 0                                  # counted afresh


def test_throttle_tracks_a_bounded_number_of_addresses():
    t = LoginThrottle(max_clients=100, clock=Clock())
    for k in range(1000):
        t.failed(f"10.0.{k // 256}.{k % 256}")
    assert len(t._clients) == 100


def test_failed_passwords_are_slowed_then_locked_out_per_address(small_run, tmp_path):
    clock = Clock()
    throttle = LoginThrottle(free=2, lock_after=5, window=900, lockout=300, clock=clock)
    app = create_app(run=small_run, password=PASSWORD, work_dir=tmp_path / "app", throttle=throttle)
    client = app.server.test_client()
    me, other = {"REMOTE_ADDR": "10.1.1.7"}, {"REMOTE_ADDR": "10.1.1.8"}

    def get(password, env=me):
        return client.get("/", headers=basic(password) if password is not None else {},
                          environ_base=env)

    assert get(None).status_code == 401                       # no credentials: not a failure
    assert [get("guess").status_code for _ in range(2)] == [401, 401]
    assert get("guess").status_code == 401                    # third failure: 1 s wait
    r = get(PASSWORD)                                          # even the right one waits
    assert r.status_code == 429 and r.headers["Retry-After"] == "1"
    assert get(PASSWORD, other).status_code == 200            # another address is not slowed
    clock.now += 1.01
    assert get("guess").status_code == 401                    # fourth: 2 s
    clock.now += 2.01
    r = get("guess")                                           # fifth: locked out
    assert r.status_code == 429 and "locked out" in r.get_data(as_text=True)
    clock.now += 100
    assert get(PASSWORD).status_code == 429                   # right password, still locked
    assert get(None).status_code == 429
    clock.now += 201
    assert get(PASSWORD).status_code == 200                   # after the lockout
    assert get("guess").status_code == 401                    # and counted afresh


# --------------------------------------------------------------------------- request size


def test_an_oversized_request_is_refused_from_its_headers(open_app):
    client = open_app.server.test_client()
    r = client.post("/_dash-update-component", data=b"{}",
                    headers={"Content-Type": "application/json", "Origin": "http://localhost"},
                    environ_overrides={"CONTENT_LENGTH": str(MAX_REQUEST_BYTES + 1)})
    assert r.status_code == 413


def test_the_real_server_refuses_an_oversized_body_before_reading_it(open_app):
    """Only the headers are sent: the answer comes at once, no body is waited for."""
    url, stop = serve_in_thread(open_app)
    try:
        port = int(url.rsplit(":", 1)[1].strip("/"))
        with socket.create_connection(("127.0.0.1", port), timeout=10) as s:
            s.sendall(b"POST /_dash-update-component HTTP/1.1\r\nHost: 127.0.0.1\r\n"
                      b"Origin: http://127.0.0.1\r\nContent-Type: application/json\r\n"
                      b"Content-Length: %d\r\n\r\n" % (MAX_REQUEST_BYTES + 1))
            t0 = time.perf_counter()
            head = s.recv(200)
            assert head.startswith(b"HTTP/1.1 413"), head
            assert time.perf_counter() - t0 < 5
    finally:
        stop()


# --------------------------------------------------------------------------- the command


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.slow
def test_the_dashboard_command_serves_with_waitress_and_stops_on_sigterm(tmp_path):
    path = write_workbook(minimal_sheets(), tmp_path / "station.xlsx")
    port = _free_port()
    env = {k: v for k, v in os.environ.items() if k != "REAGENTPLAN_DASHBOARD_PASSWORD"}
    env["TMPDIR"] = str(tmp_path)
    env["REAGENTPLAN_CACHE"] = str(tmp_path / "plan-cache")
    proc = subprocess.Popen([sys.executable, "-m", "reagentplan", "dashboard", str(path), "--port",
                             str(port), "--futures", "0", "--time-limit", "20"], cwd=ROOT, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 120
        while True:
            try:
                r = urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=5)
                break
            except OSError:
                assert proc.poll() is None, proc.communicate()
                assert time.monotonic() < deadline, "the dashboard did not start"
                time.sleep(0.3)
        assert r.status == 200 and r.headers["Server"] == "reagentplan"
        assert r.headers["X-Frame-Options"] == "DENY"
        assert any(p.name.startswith("reagentplan-dashboard-") for p in tmp_path.iterdir())
        while b"plan-id" not in urllib.request.urlopen(f"http://127.0.0.1:{port}/_dash-layout",
                                                       timeout=30).read():  # the first plan
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "the first plan was not made"
            time.sleep(0.3)
    finally:
        proc.send_signal(signal.SIGTERM)
        out, err = proc.communicate(timeout=60)
    assert proc.returncode == 0, err
    assert "Traceback" not in err
    assert f"Dashboard on http://127.0.0.1:{port}/" in out
    assert "The first plan is ready" in out
    assert len(list((tmp_path / "plan-cache").glob("*.plan"))) == 1  # kept for the next start
    assert not any(p.name.startswith("reagentplan-dashboard-") for p in tmp_path.iterdir())
