"""Headless Chromium for checking the dashboard (the browser test and the benchmark).

Uses Debian's ``chromium`` and ``chromium-driver`` through Selenium (the ``test``
extra); Selenium is imported only when a driver is made.  The flags keep Chromium off
the network: no background fetches, no component updates, no sync.
"""

from __future__ import annotations

import os

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"
FLAGS = ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--no-first-run", "--disable-extensions", "--window-size=1500,1100")


def chromium_driver(profile: str | os.PathLike, downloads: str | os.PathLike | None = None):
    """A Selenium Chrome driver on Debian's Chromium with a fresh ``profile`` folder;
    files the page downloads go to ``downloads`` when given."""
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    os.environ.setdefault("SE_OFFLINE", "true")  # never let Selenium look for drivers online
    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for arg in FLAGS + (f"--user-data-dir={profile}",):
        opts.add_argument(arg)
    if downloads is not None:
        opts.add_experimental_option("prefs", {
            "download.default_directory": str(downloads), "download.prompt_for_download": False,
            "download.directory_upgrade": True, "safebrowsing.enabled": False})
    driver = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=opts)
    if downloads is not None:
        driver.execute_cdp_cmd("Browser.setDownloadBehavior",
                               {"behavior": "allow", "downloadPath": str(downloads)})
    return driver


def serve_in_thread(app, host: str = "127.0.0.1", threads: int | None = None):
    """Serve ``app`` with the production server (`dashboard.app.make_server`, waitress)
    on a free port of ``host`` in a daemon thread; returns ``(url, stop)``."""
    import threading

    from .app import SERVER_THREADS, make_server, stop_server

    server = make_server(app, host, 0, threads=threads or SERVER_THREADS)
    thread = threading.Thread(target=server.run, daemon=True, name="reagentplan-server")
    thread.start()

    def stop() -> None:
        stop_server(server)
        thread.join(10)

    return f"http://{host}:{server.effective_port}/", stop


class DashSession:
    """One user's session of the dashboard over plain HTTP, as the page makes its
    requests: the page and its layout, each view's redraw for a plan, and a re-plan
    through Dash's background-callback protocol (start, then poll until done).

    For load tests and `bench/serve.py` on 127.0.0.1 only; every request carries the
    page's own ``Origin``.  ``timings`` collects ``(what, seconds)``; ``errors`` every
    unexpected answer.
    """

    def __init__(self, url: str, password: str | None = None, timeout: float = 120.0):
        from urllib.parse import urlsplit

        parts = urlsplit(url)
        if parts.hostname not in ("127.0.0.1", "localhost", "::1"):
            raise ValueError("load sessions go to a loopback address only")
        self.url = url.rstrip("/")
        self.origin = f"{parts.scheme}://{parts.netloc}"
        self.timeout = timeout
        self.headers = {"Origin": self.origin}
        if password:
            import base64

            token = base64.b64encode(f"load:{password}".encode()).decode()
            self.headers["Authorization"] = f"Basic {token}"
        self.end_id: str | None = None
        self.scenario_id: str | None = None
        self.plan_id: str | None = None
        self.timings: list[tuple[str, float]] = []
        #: (what, start, end) on `time.perf_counter`, to tell what ran at the same time
        self.events: list[tuple[str, float, float]] = []
        self.errors: list[str] = []

    def sign_in(self, name: str, password: str) -> bool:
        """Sign in on the dashboard's own page (a record with users) and keep the
        session cookie for the requests that follow; False (and an error) if refused."""
        import http.client
        import time
        from urllib.parse import urlencode, urlsplit

        parts = urlsplit(self.url)
        conn = http.client.HTTPConnection(parts.hostname, parts.port, timeout=self.timeout)
        t0 = time.perf_counter()
        try:
            conn.request("POST", "/signin", urlencode({"name": name, "password": password}),
                         {"Content-Type": "application/x-www-form-urlencoded", "Origin": self.origin})
            r = conn.getresponse()
            r.read()
            cookie = r.getheader("Set-Cookie")
        finally:
            conn.close()
        self.timings.append(("sign-in", time.perf_counter() - t0))
        if r.status != 303 or not cookie:
            self.errors.append(f"sign-in as {name}: HTTP {r.status}")
            return False
        self.headers["Cookie"] = cookie.split(";", 1)[0]
        return True

    # ------------------------------------------------------------------ http

    def _request(self, method: str, path: str, body: dict | None = None):
        import json
        import time
        import urllib.error
        import urllib.request

        data = json.dumps(body).encode() if body is not None else None
        headers = dict(self.headers)
        if data is not None:
            headers["Content-Type"] = "application/json"
        req = urllib.request.Request(self.url + path, data=data, method=method, headers=headers)
        t0 = time.perf_counter()
        try:
            with urllib.request.urlopen(req, timeout=self.timeout) as r:
                status, raw = r.status, r.read()
        except urllib.error.HTTPError as exc:
            status, raw = exc.code, exc.read()
        return status, raw, time.perf_counter() - t0

    def _timed(self, what: str, method: str, path: str, body: dict | None = None,
               ok: tuple[int, ...] = (200,)):
        import time

        t0 = time.perf_counter()
        status, raw, seconds = self._request(method, path, body)
        self.timings.append((what, seconds))
        self.events.append((what, t0, t0 + seconds))
        if status not in ok:
            self.errors.append(f"{what}: HTTP {status} {raw[:200]!r}")
        return status, raw

    # ------------------------------------------------------------------ the page

    def load_page(self) -> None:
        """The page, its layout and its callbacks, as a browser opening it does."""
        import json
        import re

        status, raw = self._timed("page", "GET", "/")
        m = re.search(rb'<script id="_dash-config" type="application/json">(.*?)</script>', raw, re.S)
        if status == 200 and m:
            self.end_id = json.loads(m.group(1)).get("end_id")
        status, raw = self._timed("layout", "GET", "/_dash-layout")
        if status == 200:
            text = raw.decode("utf-8", "replace")
            for key in ("scenario-id", "plan-id"):
                m = re.search(r'"id":\s*"%s"[^{}]*?"data":\s*"([0-9a-f]{32})"' % key, text) or \
                    re.search(r'"data":\s*"([0-9a-f]{32})"[^{}]*?"id":\s*"%s"' % key, text)
                if m:
                    setattr(self, key.replace("-", "_"), m.group(1))
                else:
                    self.errors.append(f"layout: no {key}")
        self._timed("dependencies", "GET", "/_dash-dependencies")

    @staticmethod
    def _multi(outputs: list[tuple[str, str]]) -> str:
        return ".." + "...".join(f"{i}.{p}" for i, p in outputs) + ".."

    def view_request(self, view, plan_id: str) -> dict:
        outputs = [(k, "figure" if k in view.FIGURE_OUTPUTS else "children") for k in view.OUTPUTS]
        return {"output": self._multi(outputs),
                "outputs": [{"id": i, "property": p} for i, p in outputs],
                "inputs": [{"id": "plan-id", "property": "data", "value": plan_id}],
                "changedPropIds": ["plan-id.data"], "state": []}

    def load_view(self, view, plan_id: str | None = None) -> dict | None:
        """One view drawn for a plan (the page's redraw when the plan changes)."""
        import json

        status, raw = self._timed(f"view {view.__name__.rsplit('.', 1)[-1]}", "POST",
                                  "/_dash-update-component",
                                  self.view_request(view, plan_id or self.plan_id))
        if status != 200:
            return None
        response = json.loads(raw).get("response", {})
        missing = [k for k in view.OUTPUTS if k not in response]
        if missing:
            self.errors.append(f"view {view.__name__}: no {', '.join(missing)}")
        return response

    def load_every_view(self) -> None:
        from .views import coordinator, plant, sales

        for view in (coordinator, plant, sales):
            self.load_view(view)

    # ------------------------------------------------------------------ re-plan

    def replan(self, removal: float | None = None, clicks: int = 1, poll: float = 0.25,
               limit: float = 600.0) -> tuple[str | None, str]:
        """Press Re-plan (with the removal slider at ``removal``) and wait for the new
        plan: ``(plan id or None, message)``."""
        import json
        import time
        from urllib.parse import urlencode

        from .views import controls as C

        outputs = [("plan-id", "data"), (C.REPLAN_MESSAGE, "children"),
                   (C.REPLAN_MESSAGE, "className")]
        body = {"output": self._multi(outputs),
                "outputs": [{"id": i, "property": p} for i, p in outputs],
                "inputs": [{"id": C.REPLAN, "property": "n_clicks", "value": clicks}],
                "changedPropIds": [f"{C.REPLAN}.n_clicks"],
                "state": [{"id": "scenario-id", "property": "data", "value": self.scenario_id},
                          {"id": C.LOAD, "property": "value", "value": 100},
                          {"id": C.SULFUR, "property": "value", "value": 100},
                          {"id": C.REMOVAL, "property": "value", "value": removal},
                          {"id": C.OUTAGE_ON, "property": "value", "value": []},
                          {"id": C.OUTAGE_RANGE, "property": "value", "value": [0, 13]},
                          {"id": C.REMOVAL_RANGE, "property": "value", "value": None},
                          {"id": C.ALLOWANCE_PRICE, "property": "value", "value": None}]}
        t0 = time.perf_counter()
        query = {"endId": self.end_id} if self.end_id else {}
        status, raw, _ = self._request("POST", "/_dash-update-component?" + urlencode(query), body)
        if status not in (200, 202):
            self.errors.append(f"replan start: HTTP {status} {raw[:200]!r}")
            return None, ""
        handles = json.loads(raw)
        if "response" in handles:  # answered at once: refused (a viewer), nothing started
            message = handles["response"].get(C.REPLAN_MESSAGE, {}).get("children", "")
            self.errors.append(f"replan refused: {message}")
            return None, message
        query.update({"cacheKey": handles["cacheKey"], "job": handles["job"]})
        while time.perf_counter() - t0 < limit:
            time.sleep(poll)
            status, raw, _ = self._request("POST", "/_dash-update-component?" + urlencode(query), body)
            if status == 204 or not raw:
                continue
            if status != 200:
                self.errors.append(f"replan poll: HTTP {status} {raw[:200]!r}")
                return None, ""
            answer = json.loads(raw)
            if "response" not in answer:
                continue  # progress only
            self.timings.append(("replan", time.perf_counter() - t0))
            self.events.append(("replan", t0, time.perf_counter()))
            r = answer["response"]
            plan_id = r.get("plan-id", {}).get("data")
            message = r.get(C.REPLAN_MESSAGE, {}).get("children", "")
            if plan_id:
                self.plan_id = plan_id
            else:
                self.errors.append(f"replan: no new plan ({message})")
            return plan_id, message
        self.errors.append("replan: no answer in time")
        return None, ""
