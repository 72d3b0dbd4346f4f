"""People, roles and the HTTP interface (OPERATIONS.md, "People, roles and the HTTP
interface"): `reagentplan users`, and the dashboard with a record that has users,
asked over real HTTP (waitress on 127.0.0.1) on SQLite and on a real PostgreSQL server:
sign-in by page and by HTTP Basic, roles enforced on the server, `POST /api/v1/record`
through the record's own path, `GET /api/v1/plans/latest`, hostile input refused with
nothing written."""

from __future__ import annotations

import base64
import datetime as dt
import http.client
import io
import json
import re
import uuid
import zipfile
from urllib.parse import urlencode

import pytest
import sqlalchemy as sa

from reagentplan.cli import main
from reagentplan.record.db import connect
from reagentplan.record.users import verify

from helpers import START
from record_data import day, record_sheets, scenario_path, write_record

AS_OF = START - dt.timedelta(days=1)
PASSWORDS = {"ana": "ana-coordinates-1", "vic": "vic-only-looks-2", "root": "root-manages-3"}
ROLES = {"ana": "coordinator", "vic": "viewer", "root": "admin"}


def _count(url: str, table: str) -> int:
    engine = connect(url)
    with engine.connect() as conn:
        n = conn.execute(sa.text(f"SELECT COUNT(*) FROM {table}")).scalar()
    engine.dispose()
    return n


def _add_users(url: str, monkeypatch) -> None:
    for name, role in ROLES.items():
        monkeypatch.setenv("REAGENTPLAN_NEW_PASSWORD", PASSWORDS[name])
        assert main(["users", "add", name, "--role", role, "--db", url]) == 0
    monkeypatch.delenv("REAGENTPLAN_NEW_PASSWORD")


# --------------------------------------------------------------------------- the command


def test_users_command(db_url, monkeypatch, capsys):
    url = db_url
    assert main(["db", "upgrade", "--db", url]) == 0
    _add_users(url, monkeypatch)
    out = capsys.readouterr().out
    assert "Added ana (coordinator)" in out
    assert main(["users", "list", "--db", url]) == 0
    out = capsys.readouterr().out
    assert re.search(r"ana\s+coordinator", out) and re.search(r"vic\s+viewer", out)
    # only a slow salted hash is kept (Argon2id), never the password
    engine = connect(url)
    with engine.connect() as conn:
        hashes = dict(conn.execute(sa.text("SELECT name, password_hash FROM users")).all())
    assert all(h.startswith("$argon2id$") for h in hashes.values())
    assert not any(PASSWORDS[n] in h for n, h in hashes.items())
    assert verify(engine, "ana", PASSWORDS["ana"]).role == "coordinator"
    assert verify(engine, "ana", "wrong-password") is None
    assert verify(engine, "nobody", PASSWORDS["ana"]) is None
    # the password is never taken from the command line
    with pytest.raises(SystemExit):
        main(["users", "add", "eve", "--role", "viewer", "--password", "x" * 12, "--db", url])
    # no password in the environment and no terminal: refused, nothing written
    monkeypatch.setattr("sys.stdin", io.StringIO(""))
    assert main(["users", "add", "eve", "--role", "viewer", "--db", url]) == 2
    assert "REAGENTPLAN_NEW_PASSWORD" in capsys.readouterr().err
    monkeypatch.setenv("REAGENTPLAN_NEW_PASSWORD", "short")
    assert main(["users", "add", "eve", "--role", "viewer", "--db", url]) == 2
    assert "at least 10 characters" in capsys.readouterr().err
    monkeypatch.setenv("REAGENTPLAN_NEW_PASSWORD", "a-new-password-9")
    assert main(["users", "add", "ana", "--role", "viewer", "--db", url]) == 2  # already there
    assert "already a user" in capsys.readouterr().err
    assert main(["users", "add", "=cmd|x", "--role", "viewer", "--db", url]) == 2
    assert main(["users", "password", "ana", "--db", url]) == 0
    assert verify(engine, "ana", PASSWORDS["ana"]) is None
    assert verify(engine, "ana", "a-new-password-9") is not None
    assert main(["users", "remove", "vic", "--db", url]) == 0
    assert main(["users", "remove", "vic", "--db", url]) == 2
    assert verify(engine, "vic", PASSWORDS["vic"]) is None
    assert _count(url, "users") == 2
    engine.dispose()


def test_cli_writes_name_who(tmp_path, monkeypatch, capsys):
    """A command-line write is recorded as the OS user, or as --user, which must be a
    user of the record once it has users."""
    url = f"sqlite:///{tmp_path / 'r.db'}"
    wb = scenario_path(tmp_path)
    f = write_record(record_sheets(), tmp_path / "w.xlsx")
    assert main(["db", "upgrade", "--db", url]) == 0
    _add_users(url, monkeypatch)
    assert main(["record", str(f), "--db", url, "--scenario", str(wb), "--as-of", f"{AS_OF}",
                 "--user", "nobody"]) == 2
    assert "no user named 'nobody'" in capsys.readouterr().err
    assert main(["record", str(f), "--db", url, "--scenario", str(wb), "--as-of", f"{AS_OF}",
                 "--user", "ana"]) == 0
    assert main(["plan", str(wb), "--db", url, "--as-of", f"{AS_OF}", "--out", str(tmp_path / "p"),
                 "--futures", "0", "--user", "root"]) in (0, 1)
    engine = connect(url)
    with engine.connect() as conn:
        assert conn.execute(sa.text("SELECT recorded_by FROM imports")).scalar() == "ana"
        assert conn.execute(sa.text("SELECT created_by FROM plan_versions")).scalar() == "root"
    engine.dispose()


# --------------------------------------------------------------------------- over HTTP


class Client:
    """Plain HTTP to the served dashboard (no redirects followed, cookies kept)."""

    def __init__(self, port: int):
        self.port = port
        self.cookie: str | None = None

    def request(self, method: str, path: str, body: bytes | None = None, headers: dict | None = None):
        conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=120)
        headers = dict(headers or {})
        if self.cookie:
            headers.setdefault("Cookie", self.cookie)
        conn.request(method, path, body, headers)
        r = conn.getresponse()
        data = r.read()
        cookie = r.getheader("Set-Cookie")
        if cookie:
            self.cookie = cookie.split(";", 1)[0]
        conn.close()
        return r.status, {k.lower(): v for k, v in r.getheaders()}, data

    def json(self, method: str, path: str, body=None, headers=None):
        status, head, data = self.request(method, path, body, headers)
        assert b"Traceback" not in data
        return status, json.loads(data) if data else None


def basic(name: str, password: str | None = None) -> dict:
    token = base64.b64encode(f"{name}:{password or PASSWORDS[name]}".encode()).decode()
    return {"Authorization": f"Basic {token}"}


def multipart(name: str, content: bytes, **fields) -> tuple[bytes, dict]:
    boundary = uuid.uuid4().hex
    parts = [f'--{boundary}\r\nContent-Disposition: form-data; name="{k}"\r\n\r\n{v}\r\n'.encode()
             for k, v in fields.items()]
    parts.append(f'--{boundary}\r\nContent-Disposition: form-data; name="file"; filename="{name}"\r\n'
                 f"Content-Type: application/octet-stream\r\n\r\n".encode() + content + b"\r\n")
    return b"".join(parts) + f"--{boundary}--\r\n".encode(), {
        "Content-Type": f"multipart/form-data; boundary={boundary}"}


@pytest.fixture
def served(db_url, tmp_path, monkeypatch):
    """A record with facts, one plan version and three users, and the dashboard on it."""
    from reagentplan.dashboard.app import create_app
    from reagentplan.dashboard.security import LoginThrottle
    from reagentplan.dashboard.testing import serve_in_thread

    url = db_url
    wb = scenario_path(tmp_path)
    assert main(["db", "upgrade", "--db", url]) == 0
    assert main(["record", str(write_record(record_sheets(), tmp_path / "w.xlsx")), "--db", url,
                 "--scenario", str(wb), "--as-of", f"{AS_OF}"]) == 0
    assert main(["plan", str(wb), "--db", url, "--as-of", f"{AS_OF}", "--out", str(tmp_path / "p"),
                 "--futures", "0"]) in (0, 1)
    _add_users(url, monkeypatch)
    clock = [0.0]
    throttle = LoginThrottle(clock=lambda: clock[0])
    app = create_app(str(wb), db=url, futures=0, time_limit=20, work_dir=tmp_path / "app",
                     throttle=throttle)
    base, stop = serve_in_thread(app)
    port = int(base.rsplit(":", 1)[1].strip("/"))
    try:
        yield {"url": url, "port": port, "app": app, "throttle": throttle, "clock": clock}
    finally:
        stop()
        app.reagentplan.people.engine.dispose()


def test_the_interface_over_http(served):
    url, port = served["url"], served["port"]
    c = Client(port)
    arrivals = _count(url, "arrivals")
    good = f"date,supplier,loads,tonnes,ticket\n{day(6)},Quarry Q,1,1000,T-2001\n".encode()

    # without credentials: 401 for scripts, the sign-in page for people
    status, body = c.json("GET", "/api/v1/plans/latest")
    assert status == 401 and body["error"] == "unauthorized"
    assert c.request("GET", "/api/v1/plans/latest")[1].get("www-authenticate", "").startswith("Basic")
    data, head = multipart("arrivals.csv", good)
    assert c.json("POST", "/api/v1/record", data, head)[0] == 401
    status, head_, _ = c.request("GET", "/")
    assert status == 303 and head_["location"].endswith("/signin")
    assert c.request("GET", "/_dash-layout")[0] == 401
    # a wrong password, an unknown person: 401, nothing written
    assert c.json("POST", "/api/v1/record", data, {**head, **basic("ana", "not-her-password")})[0] == 401
    assert c.json("POST", "/api/v1/record", data, {**head, **basic("mallory", "whatever-123")})[0] == 401
    assert _count(url, "arrivals") == arrivals

    # a viewer reads the plan in force but records nothing
    status, summary = c.json("GET", "/api/v1/plans/latest", headers=basic("vic"))
    assert status == 200 and summary["plan_id"] == 1 and summary["as_of"] == f"{AS_OF}"
    assert "total_cost" in summary and summary["created_by"]
    status, body = c.json("POST", "/api/v1/record", data, {**head, **basic("vic")})
    assert status == 403 and "viewer" in body["message"]
    assert c.json("GET", "/api/v1/users", headers=basic("vic"))[0] == 403
    assert c.json("GET", "/api/v1/users", headers=basic("ana"))[0] == 403
    status, users = c.json("GET", "/api/v1/users", headers=basic("root"))
    assert status == 200 and {"name": "ana", "role": "coordinator"} in users
    status, spec = c.json("GET", "/api/v1/openapi.json", headers=basic("vic"))
    assert status == 200 and spec["openapi"].startswith("3.")
    assert {"200", "401", "403", "409", "422"} <= set(spec["paths"]["/api/v1/record"]["post"]["responses"])
    assert _count(url, "arrivals") == arrivals

    # a coordinator's script (no Origin) records a day's arrivals
    status, body = c.json("POST", "/api/v1/record", data, {**head, **basic("ana")})
    assert status == 200, body
    assert body["sheets"]["arrivals"] == {"added": 1, "unchanged": 0, "replaced": 0}
    assert body["recorded_by"] == "ana"
    assert _count(url, "arrivals") == arrivals + 1
    status, body = c.json("POST", "/api/v1/record", data, {**head, **basic("ana")})
    assert status == 200 and body["sheets"]["arrivals"]["unchanged"] == 1 and not body["changed"]
    # a conflict: 409 naming it, nothing written
    data2, head2 = multipart("arrivals.csv", good.replace(b"1000,T-2001", b"990,T-2001"))
    status, body = c.json("POST", "/api/v1/record", data2, {**head2, **basic("ana")})
    assert status == 409
    assert body["conflicts"][0]["row"] == 2 and body["conflicts"][0]["column"] == "tonnes"
    assert "990" in body["conflicts"][0]["found"]
    # replace=1 accepts it (the old value kept in the audit trail)
    data3, head3 = multipart("arrivals.csv", good.replace(b"1000,T-2001", b"990,T-2001"), replace="1")
    status, body = c.json("POST", "/api/v1/record", data3, {**head3, **basic("ana")})
    assert status == 200 and body["sheets"]["arrivals"]["replaced"] == 1
    assert _count(url, "arrivals") == arrivals + 1
    engine = connect(url)
    with engine.connect() as conn:
        who = conn.execute(sa.text("SELECT recorded_by FROM imports ORDER BY id")).scalars().all()
    engine.dispose()
    assert who[-2:] == ["ana", "ana"]

    # a cross-site browser request stays refused, credentials or not
    status, _, text = c.request("POST", "/api/v1/record", data,
                                {**head, **basic("ana"), "Origin": "http://evil.example"})
    assert status == 403 and b"own page" in text
    status, _, _ = c.request("POST", "/api/v1/record", data,
                             {**head, **basic("ana"), "Sec-Fetch-Site": "cross-site"})
    assert status == 403


@pytest.mark.parametrize("name, content, status, where", [
    # a bad name (did you mean), located by sheet, row and column
    ("arrivals.csv", b"date,supplier,loads,tonnes,ticket\n2020-01-01,Quarry W,1,990,X1\n", 422, "supplier"),
    # formulas in text cells (CSV injection), in any text column
    ("arrivals.csv", b"date,supplier,loads,tonnes,ticket\nD,Quarry Q,1,990,=cmd|' /C calc'!A0\n", 422, "ticket"),
    ("shipments.csv", b"date,party,material,loads,tonnes,ticket\nD,@SUM(1+1),gypsum,1,25,S-9\n", 422, "party"),
    ("stock_surveys.csv", b"date,store,level_t,note\nD,gypsum,1000,+1+cmd\n", 422, "note"),
    # files that are not what their names say
    ("arrivals.xlsx", b"date,supplier,loads,tonnes,ticket\n", 422, None),
    ("arrivals.csv", None, 422, None),  # a zip (an .xlsx) named .csv
    ("report.pdf", b"%PDF-1.4 ...", 422, "file"),
    ("trucks.csv", b"date,supplier\n", 422, None),  # named after no sheet
    ("arrivals.csv", b"\xff\xfe\x00d\x00a\x00t\x00e", 422, None),  # not UTF-8
])
def test_hostile_uploads_are_refused_with_nothing_written(served, name, content, status, where):
    url, c = served["url"], Client(served["port"])
    before = {t: _count(url, t) for t in ("arrivals", "shipments", "stock_surveys", "imports")}
    if content is None:
        buf = io.BytesIO()
        with zipfile.ZipFile(buf, "w") as z:
            z.writestr("xl/workbook.xml", "<workbook/>")
        content = buf.getvalue()
    content = content.replace(b"\nD,", f"\n{day(6)},".encode())
    data, head = multipart(name, content)
    got, body = c.json("POST", "/api/v1/record", data, {**head, **basic("ana")})
    assert got == status, body
    assert body["message"] and "Nothing was recorded" in body["message"]
    if where is not None:
        assert any(p["column"] == where for p in body["problems"]), body["problems"]
    if where in ("ticket", "party", "note"):
        assert "formula" in body["problems"][0]["expected"]
    assert {t: _count(url, t) for t in before} == before


def test_oversized_and_malformed_requests(served):
    url, c = served["url"], Client(served["port"])
    before = _count(url, "imports")
    big, head = multipart("arrivals.csv", b"date,supplier,loads,tonnes,ticket\n" + b"x" * (10 * 2**20 + 10))
    status, _, text = c.request("POST", "/api/v1/record", big, {**head, **basic("ana")})
    assert status == 413 and b"Traceback" not in text
    # over the server's own limit: refused from the header, before the body is read
    status, _, _ = c.request("POST", "/api/v1/record", b"x" * 1024,
                             {**head, **basic("ana"), "Content-Length": str(64 * 2**20)})
    assert status == 413
    # no multipart at all, a broken multipart, the wrong field
    for body, headers in ((b"date,supplier\n", {"Content-Type": "text/csv"}),
                          (b"--nope\r\ngarbage", {"Content-Type": "multipart/form-data; boundary=zzz"}),
                          (multipart("arrivals.csv", b"a")[0].replace(b'name="file"', b'name="upload"'),
                           multipart("arrivals.csv", b"a")[1])):
        status, answer = c.json("POST", "/api/v1/record", body, {**headers, **basic("ana")})
        assert status in (400, 422), (status, answer)
        assert answer["message"]
    assert _count(url, "imports") == before


def test_people_sign_in_and_roles_hold_on_the_server(served):
    """The sign-in page sets a session cookie; a viewer's session cannot record, re-plan
    or download (the server answers with the refusal on the page), a coordinator's can;
    failed sign-ins are slowed and locked out per person and per address."""
    from reagentplan.dashboard.views import record as R

    url, port, app, throttle = served["url"], served["port"], served["app"], served["throttle"]
    origin = {"Origin": f"http://127.0.0.1:{port}"}
    form = {"Content-Type": "application/x-www-form-urlencoded", **origin}
    vic = Client(port)
    assert vic.request("GET", "/signin")[0] == 200
    status, _, page = vic.request("POST", "/signin", urlencode({"name": "vic", "password": "nope-nope-1"}).encode(),
                                  form)
    assert status == 401 and b"Wrong name or password" in page and vic.cookie is None
    # a sign-in form posted from another site is refused
    evil = Client(port)
    status, _, _ = evil.request("POST", "/signin", urlencode({"name": "vic", "password": PASSWORDS["vic"]}).encode(),
                                {**form, "Origin": "http://evil.example"})
    assert status == 403 and evil.cookie is None
    status, head, _ = vic.request("POST", "/signin", urlencode({"name": "vic", "password": PASSWORDS["vic"]}).encode(),
                                  form)
    assert status == 303 and vic.cookie and vic.cookie.startswith("reagentplan_session=")
    assert "HttpOnly" in head["set-cookie"] and "Expires" in head["set-cookie"]
    status, _, page = vic.request("GET", "/")
    assert status == 200 and b"Signed in as" in page and b">vic<" in page
    assert vic.request("GET", "/_dash-layout")[0] == 200
    # a viewer's upload through the record tab: refused by the server, with the reason
    outs = [(R.UPLOAD_MESSAGE, "children"), (R.UPLOAD_MESSAGE, "className")] + [
        (k, "figure" if k in R.FIGURE_OUTPUTS else "children") for k in R.OUTPUTS]
    upload = {"output": ".." + "...".join(f"{i}.{p}" for i, p in outs) + "..",
              "outputs": [{"id": i, "property": p} for i, p in outs], "inputs": [{"id": R.UPLOAD, "property": "contents", "value":
                                         "data:text/csv;base64," + base64.b64encode(
                                             f"date,store,level_t\n{AS_OF},gypsum,1300\n".encode()).decode()}],
              "changedPropIds": [f"{R.UPLOAD}.contents"],
              "state": [{"id": R.UPLOAD, "property": "filename", "value": "stock_surveys.csv"},
                        {"id": R.REPLACE, "property": "value", "value": []}]}
    headers = {"Content-Type": "application/json", **origin}
    surveys = _count(url, "stock_surveys")
    status, answer = vic.json("POST", "/_dash-update-component", json.dumps(upload).encode(), headers)
    assert status == 200
    assert "viewer" in answer["response"][R.UPLOAD_MESSAGE]["children"]
    assert _count(url, "stock_surveys") == surveys
    # the same upload from a coordinator's session lands, recorded as theirs
    ana = Client(port)
    ana.request("POST", "/signin", urlencode({"name": "ana", "password": PASSWORDS["ana"]}).encode(), form)
    status, answer = ana.json("POST", "/_dash-update-component", json.dumps(upload).encode(), headers)
    assert status == 200 and "1 added" in answer["response"][R.UPLOAD_MESSAGE]["children"]
    assert "ana" in json.dumps(answer["response"]["record-imports"])
    assert _count(url, "stock_surveys") == surveys + 1
    # re-plans: a viewer's is refused before anything starts, a coordinator's runs
    from reagentplan.dashboard.testing import DashSession

    base = f"http://127.0.0.1:{port}/"
    viewer = DashSession(base)
    assert viewer.sign_in("vic", PASSWORDS["vic"])
    viewer.load_page()
    plan_id, message = viewer.replan(removal=96.0)
    assert plan_id is None and "only a coordinator or above may re-plan" in message
    coordinator = DashSession(base)
    assert coordinator.sign_in("ana", PASSWORDS["ana"])
    coordinator.load_page()
    plan_id, _ = coordinator.replan(removal=96.0, limit=300)
    assert plan_id and not coordinator.errors, coordinator.errors
    # a session cookie never passes for a script: no Origin, no Basic -> refused
    data, head = multipart("arrivals.csv", b"date\n")
    assert ana.request("POST", "/api/v1/record", data, head)[0] == 403
    # sign out ends the session
    assert ana.request("POST", "/signout", b"", origin)[0] == 303
    assert ana.request("GET", "/_dash-layout")[0] == 401
    # removing a person ends their session at once (within the short lookup memo)
    assert main(["users", "remove", "vic", "--db", url]) == 0
    app.reagentplan.people._people.clear()
    assert vic.request("GET", "/_dash-layout")[0] == 401

    # failed sign-ins: 3 free, then a wait (429 without checking), counted per person
    # and per address
    served["clock"][0] += 10_000
    c = Client(port)
    for _ in range(3):
        assert c.json("GET", "/api/v1/plans/latest", headers=basic("ana", "guess-guess-1"))[0] == 401
    assert c.json("GET", "/api/v1/plans/latest", headers=basic("ana", "guess-guess-2"))[0] == 401
    status, body = c.json("GET", "/api/v1/plans/latest", headers=basic("ana"))  # right, but must wait
    assert status == 429 and "try again" in body["message"]
    assert throttle.retry_after("user:ana") > 0 and throttle.retry_after("addr:127.0.0.1") > 0
    served["clock"][0] += 10_000
    assert c.json("GET", "/api/v1/plans/latest", headers=basic("ana"))[0] == 200
