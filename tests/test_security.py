"""Security: nobody gets in without the password or a link, and no link reaches another judge's answers.

The route checks iterate ``app.url_map``: a route added later is checked too, and a route with a URL
parameter this file does not know how to fill fails the test until a value is added to ``PARAMS``.
"""

from __future__ import annotations

import inspect
import io
import json
import logging
import os
import re
import stat
import zipfile

import pytest

from helpers_reliability import PASSWORD, Server, build_project, form_csrf
from labelstudy.errors import SolutionImportError
from labelstudy.project import init_project
from labelstudy.solution import read_solution_bytes
from labelstudy.store import TOKEN_BYTES, Store
from labelstudy.web import create_app

UNSAFE = {"POST", "PUT", "PATCH", "DELETE"}


@pytest.fixture
def built(tmp_path):
    b = build_project(tmp_path / "p", n_judges=3, n_items=8)
    yield b
    b.store.close()


@pytest.fixture
def app(built):
    return create_app(built.path, {"TESTING": True})      # CSRF stays on: it is the subject here


def _csrf_of(html: str) -> str:
    m = re.search(r'name="csrf_token" value="([^"]+)"', html)
    assert m, "no csrf_token field on the page"
    return m.group(1)


def login(client) -> str:
    """Log in as the researcher; returns a valid Flask-WTF token for this session."""
    token = _csrf_of(client.get("/r/login").get_data(as_text=True))
    r = client.post("/r/login", data={"password": PASSWORD, "csrf_token": token})
    assert r.status_code == 302, r.get_data(as_text=True)[:300]
    return _csrf_of(client.get("/r/studies/new").get_data(as_text=True))


def params(built) -> dict:
    return {"sid": built.study_id, "rid": built.round_id, "jid": built.judge_ids[0], "fid": "F1",
            "iid": "Q001", "token": built.tokens[0], "n": 1, "action": "close", "name": "answers.csv",
            "filename": "labelstudy.css"}


def routes(app, built):
    """(rule, url, methods) for every rule of the map, with its parameters filled."""
    values = params(built)
    out = []
    for rule in app.url_map.iter_rules():
        missing = set(rule.arguments) - set(values)
        assert not missing, f"route {rule.rule}: add a value for {missing} to params() so it is checked"
        url = rule.build({a: values[a] for a in rule.arguments}, append_unknown=False)[1]
        out.append((rule, url, set(rule.methods) - {"HEAD", "OPTIONS"}))
    return out


def test_every_unsafe_route_refuses_a_request_without_a_valid_csrf_token(app, built):
    client = app.test_client()
    login(client)
    checked = 0
    other_link_token = form_csrf(built.project, built.tokens[1])
    for rule, url, methods in routes(app, built):
        for method in methods & UNSAFE:
            for bad in (None, "not-a-token", other_link_token):
                data = {"csrf_token": bad} if bad else {}
                r = client.open(url, method=method, data=data)
                assert r.status_code == 400, f"{method} {rule.rule} with csrf={bad!r}: {r.status_code}"
                body = r.get_data(as_text=True)
                assert "Traceback" not in body and len(body) > 20, f"{method} {rule.rule}: no clear page"
            checked += 1
    assert checked >= 10, "the map should hold at least ten state-changing routes"
    # and nothing changed: the round is still open, no link revoked, no answer, the password works
    assert built.store.get_round(built.round_id)["status"] == "open"
    assert all(i["status"] == "active" and not i["submitted_at"] for i in built.store.invitations(built.round_id))
    assert built.store.answers(built.round_id).empty
    assert [f["name"] for f in built.store.factors(built.study_id)][0] == "Belonging"


def test_every_researcher_route_needs_the_login(app, built):
    client = app.test_client()
    checked = 0
    for rule, url, methods in routes(app, built):
        if not rule.rule.startswith("/r/") or rule.rule == "/r/login":
            continue
        for method in methods:
            token = _csrf_of(client.get("/r/login").get_data(as_text=True))   # a valid token, but no login
            data = {"csrf_token": token} if method in UNSAFE else None
            r = client.open(url, method=method, data=data)
            if method in UNSAFE and rule.endpoint == "auth.logout":
                continue      # logging out needs no login
            assert r.status_code in (302, 401), f"{method} {rule.rule} without login: {r.status_code}"
            if r.status_code == 302:
                assert r.headers["Location"].split("?")[0].endswith("/r/login"), rule.rule
            checked += 1
            r = client.open(url, method=method, data=data, headers={"Accept": "application/json"})
            assert r.status_code in (302, 401), f"{method} {rule.rule} JSON without login: {r.status_code}"
    assert checked >= 14
    assert built.store.get_round(built.round_id)["status"] == "open"


def test_login_is_throttled_after_repeated_failures(app, built):
    client = app.test_client()
    limit = app.config["LOGIN_MAX_FAILURES"]
    for _ in range(limit):
        token = _csrf_of(client.get("/r/login").get_data(as_text=True))
        assert client.post("/r/login", data={"password": "wrong guess", "csrf_token": token}).status_code == 401
    token = _csrf_of(client.get("/r/login").get_data(as_text=True))
    r = client.post("/r/login", data={"password": PASSWORD, "csrf_token": token})
    assert r.status_code == 429, "even the right password waits once the limit is reached"
    assert "Too many failed attempts" in r.get_data(as_text=True)
    assert client.get("/r/").status_code == 302


def test_password_is_stored_as_a_salted_hash(tmp_path, built):
    stored = built.store.get_setting("researcher_password_hash")
    assert stored.startswith(("scrypt:", "pbkdf2:")) and PASSWORD not in stored
    other, _ = init_project(tmp_path / "other", password=PASSWORD)
    assert other.store().get_setting("researcher_password_hash") != stored, "same password, same hash: no salt"
    assert built.project.check_password(PASSWORD) and not built.project.check_password(PASSWORD + "x")


def test_judge_tokens_are_long_random_and_compared_in_constant_time(built, tmp_path):
    assert TOKEN_BYTES * 8 >= 128
    b = build_project(tmp_path / "many", n_judges=200, n_items=4)
    tokens = b.tokens
    assert len(set(tokens)) == 200
    assert all(re.fullmatch(r"[A-Za-z0-9_-]{32,}", t) for t in tokens)
    src = inspect.getsource(Store.invitation_by_token)
    assert "compare_digest" in src
    import labelstudy.store as store_mod
    assert "secrets.token_urlsafe(TOKEN_BYTES)" in inspect.getsource(store_mod)
    t = built.tokens[0]
    assert built.store.invitation_by_token(t)["judge_id"] == built.judge_ids[0]
    for wrong in (t[:-1] + ("A" if t[-1] != "A" else "B"), t[:-1], t + "x", "", "x" * 500, t.upper()):
        if wrong != t:
            assert built.store.invitation_by_token(wrong) is None


def test_tokens_never_reach_logs_or_events(app, built, caplog):
    caplog.set_level(logging.DEBUG)
    client = app.test_client()
    tok = built.tokens[0]
    csrf = form_csrf(built.project, tok)
    client.get(f"/j/{tok}")
    client.get(f"/j/{tok}/task/1")
    client.post(f"/j/{tok}/save", json={"task_id": built.task_id, "item": "Q001", "value": "F1", "revision": 1},
                headers={"X-CSRF-Token": csrf})
    client.post(f"/j/{tok}/save", data=b"{broken", headers={"X-CSRF-Token": csrf, "Content-Type": "application/json"})
    client.post(f"/j/{tok}/submit", data={"csrf_token": csrf})
    c2 = app.test_client()
    login(c2)
    rid = built.round_id
    c2.post(f"/r/rounds/{rid}/judges/{built.judge_ids[1]}/revoke", data={"csrf_token": login(c2)})
    events = json.dumps(built.store.events(limit=10_000))
    for t in built.tokens:
        assert t not in caplog.text
        assert t not in events


def test_an_unexpected_error_is_logged_without_the_link_token(built, caplog, monkeypatch):
    """Flask's error log names the request path; ours replaces a judge's link token in it."""
    import labelstudy.web.judge as judge_mod
    app = create_app(built.path, {"TESTING": False, "PROPAGATE_EXCEPTIONS": False})
    monkeypatch.setattr(judge_mod.T, "progress", lambda *a: 1 / 0)       # any bug after the save
    caplog.set_level(logging.ERROR)
    tok = built.tokens[0]
    r = app.test_client().post(f"/j/{tok}/save", json={"task_id": built.task_id, "item": "Q001", "value": "F1",
                                                       "revision": 1}, headers={"X-CSRF-Token": form_csrf(built.project, tok)})
    assert r.status_code == 500 and "Traceback" not in r.get_data(as_text=True)
    assert "ZeroDivisionError" in caplog.text and "/j/<link>/save" in caplog.text
    assert tok not in caplog.text


def test_tokens_never_reach_the_server_log(built, tmp_path):
    """The real ``labelstudy serve`` process: its output holds no judge token after a judge session."""
    import http.client
    built.store.close()
    server = Server(built.path, log_dir=tmp_path)
    try:
        server.start()
        tok = built.tokens[0]
        conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=10)
        for path in (f"/j/{tok}", f"/j/{tok}/task/1", f"/j/{tok}/state", f"/j/{tok}/task/99", "/j/" + "x" * 40):
            conn.request("GET", path)
            conn.getresponse().read()
        conn.request("POST", f"/j/{tok}/save", body=b"{}", headers={"Content-Type": "application/json"})
        assert conn.getresponse().status == 400
        conn.close()
    finally:
        server.stop()
    logs = server.logs()
    assert "Serving" in logs
    assert not any(t in logs for t in built.tokens)


def test_a_judge_can_never_reach_another_judges_answers(app, built):
    store = built.store
    client = app.test_client()
    a, b = built.tokens[0], built.tokens[1]
    ja, jb = built.judge_ids[0], built.judge_ids[1]
    # a second round of the same study: its task id belongs to another round
    rid2 = store.create_round(built.study_id, tasks=[("label_match", {"show": "both"})], seed=5)
    store.open_round(rid2)
    inv2 = store.add_judge(rid2, "Judge in round 2")
    store.record_consent(inv2["judge_id"], rid2)
    foreign_task = store.tasks(rid2)[0]["id"]
    r = client.post(f"/j/{a}/save", json={"task_id": foreign_task, "item": "Q001", "value": "F1", "revision": 1},
                    headers={"X-CSRF-Token": form_csrf(built.project, a)})
    assert r.status_code == 400 and "not part of this round" in r.get_json()["error"]
    assert store.answers(rid2).empty
    # judge_id / round_id fields in the body are ignored: the link decides whose answer it is
    r = client.post(f"/j/{a}/save", json={"task_id": built.task_id, "item": "Q002", "value": "F2", "revision": 1,
                                          "judge_id": jb, "round_id": rid2},
                    headers={"X-CSRF-Token": form_csrf(built.project, a)})
    assert r.status_code == 200
    assert [x["item"] for x in store.judge_answers(ja, built.round_id)] == ["Q002"]
    assert store.judge_answers(jb, built.round_id) == [] and store.answers(rid2).empty
    # the no-JS form ignores such fields as well
    r = client.post(f"/j/{b}/task/1", data={"csrf_token": form_csrf(built.project, b), "v__Q003": "F3",
                                            "judge_id": str(ja), "go": "stay"})
    assert r.status_code == 302
    assert [x["item"] for x in store.judge_answers(jb, built.round_id)] == ["Q003"]
    assert [x["item"] for x in store.judge_answers(ja, built.round_id)] == ["Q002"]
    # B's state shows only B's answers; A's token with B's form token is refused
    items_b = [x["item"] for x in client.get(f"/j/{b}/state").get_json()["answers"]]
    assert items_b == ["Q003"]
    r = client.post(f"/j/{a}/save", json={"task_id": built.task_id, "item": "Q004", "value": "F1", "revision": 1},
                    headers={"X-CSRF-Token": form_csrf(built.project, b)})
    assert r.status_code == 400
    assert len(store.judge_answers(ja, built.round_id)) == 1


def test_revoked_links_closed_rounds_and_submitted_answers_refuse_writes(app, built):
    store, client = built.store, app.test_client()
    a, b, c = built.tokens
    ja, jb, jc = built.judge_ids

    def save(tok, item="Q001"):
        return client.post(f"/j/{tok}/save", json={"task_id": built.task_id, "item": item, "value": "F1",
                                                   "revision": 1}, headers={"X-CSRF-Token": form_csrf(built.project, tok)})

    store.revoke(jb, built.round_id)
    r = save(b)
    assert r.status_code == 403 and "withdrawn" in r.get_json()["error"]
    r = client.post(f"/j/{b}/task/1", data={"csrf_token": form_csrf(built.project, b), "v__Q001": "F1"})
    assert r.status_code == 403
    assert store.judge_answers(jb, built.round_id) == []
    assert save(c).status_code == 200
    assert client.post(f"/j/{c}/submit", data={"csrf_token": form_csrf(built.project, c)}).status_code == 302
    r = save(c, "Q002")
    assert r.status_code == 403 and "submitted" in r.get_json()["error"]
    store.close_round(built.round_id)
    # a closed round answers like an unknown link (same status and text, so links cannot be probed)
    r, unknown = save(a), client.post("/j/" + "Z" * 32 + "/save", json={})
    assert r.status_code == unknown.status_code == 404 and r.get_json() == unknown.get_json()
    assert store.judge_answers(ja, built.round_id) == []
    assert [x["item"] for x in store.judge_answers(jc, built.round_id)] == ["Q001"]


def test_a_round_closed_during_a_save_refuses_it_with_403(app, built, monkeypatch):
    """The store re-checks the round inside the write transaction (the page may be older than the close)."""
    import labelstudy.web.judge as judge_mod
    store, client, tok = built.store, app.test_client(), built.tokens[0]
    real = judge_mod.load_context

    def load_then_close(token):
        ctx = real(token)
        if not store.get_round(built.round_id)["closed_at"]:
            store.close_round(built.round_id)
        return ctx
    monkeypatch.setattr(judge_mod, "load_context", load_then_close)
    r = client.post(f"/j/{tok}/save", json={"task_id": built.task_id, "item": "Q001", "value": "F1", "revision": 1},
                    headers={"X-CSRF-Token": form_csrf(built.project, tok)})
    assert r.status_code == 403 and "not open" in r.get_json()["error"]
    assert store.answers(built.round_id).empty


# ---------------------------------------------------------------------------------------------- uploads
def _upload(client, csrf, data: bytes, name: str):
    return client.post("/r/studies/new", data={"csrf_token": csrf, "title": "Upload test",
                                               "solution": (io.BytesIO(data), name)},
                       content_type="multipart/form-data")


def test_uploads_are_capped_with_a_413_page(app):
    client = app.test_client()
    csrf = login(client)
    r = _upload(client, csrf, b"a" * (app.config["MAX_CONTENT_LENGTH"] + 1024), "big.csv")
    assert r.status_code == 413
    assert "larger than the limit" in r.get_data(as_text=True)


def _workbook(text_cell: str) -> bytes:
    import openpyxl
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "items"
    ws.append(["item", "text", "F1", "F2"])
    ws.append(["Q1", text_cell, 0.7, 0.1])
    ws.append(["Q2", "I come to learn grafting.", 0.1, 0.7])
    ws.append(["Q3", "I like the harvest days.", 0.6, 0.2])
    ws.append(["Q4", "Pruning skills matter to me.", 0.2, 0.6])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def test_a_formula_cell_is_never_evaluated():
    data = _workbook("=1+1")
    with zipfile.ZipFile(io.BytesIO(data)) as zf:
        assert "<f>1+1</f>" in zf.read("xl/worksheets/sheet1.xml").decode()   # really a formula cell
    try:
        sol = read_solution_bytes(data, "formula.xlsx")
    except SolutionImportError as exc:
        assert "formula.xlsx" in str(exc)
    else:
        text = sol.items[0].text
        assert text != "2", "the formula was evaluated"


def _bomb() -> bytes:
    """A valid-looking .xlsx whose sheet XML inflates to 120 MB (a few hundred kB on disk)."""
    good = _workbook("I come for the company.")
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(good)) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            if info.filename == "xl/worksheets/sheet1.xml":
                xml = src.read(info).decode()
                with dst.open(info.filename, "w", force_zip64=True) as fh:
                    head, tail = xml.split("</sheetData>")
                    fh.write(head.encode())
                    chunk = b" " * (1 << 20)
                    for _ in range(120):
                        fh.write(chunk)
                    fh.write(("</sheetData>" + tail).encode())
            else:
                dst.writestr(info, src.read(info))
    return out.getvalue()


def test_zip_bombs_damaged_and_non_zip_workbooks_are_refused_with_a_message(app):
    bomb = _bomb()
    assert len(bomb) < 1_000_000
    with pytest.raises(SolutionImportError, match="unpack"):
        read_solution_bytes(bomb, "bomb.xlsx")
    with pytest.raises(SolutionImportError, match="not a zip"):
        read_solution_bytes(b"PK but not really an archive" * 10, "fake.xlsx")
    good = _workbook("I come for the company.")
    with pytest.raises(SolutionImportError, match="cut.xlsx"):   # a truncated archive
        read_solution_bytes(good[: len(good) // 2], "cut.xlsx")
    client = app.test_client()
    csrf = login(client)
    for data, name, words in ((bomb, "bomb.xlsx", "unpack"), (b"hello", "fake.xlsx", "not a zip")):
        r = _upload(client, csrf, data, name)
        assert r.status_code == 400 and words in r.get_data(as_text=True), name
    assert len(built_studies(app)) == 1


def built_studies(app):
    return app.extensions["labelstudy_store"].list_studies()


# ---------------------------------------------------------------------------------------------- headers
def test_security_headers_on_every_kind_of_page(app, built):
    client = app.test_client()
    for path in ("/r/login", f"/j/{built.tokens[0]}", f"/j/{built.tokens[0]}/state", "/j/nothing-here-at-all-x",
                 "/static/labelstudy.css"):
        r = client.get(path)
        csp = r.headers.get("Content-Security-Policy", "")
        script = next(p for p in csp.split(";") if p.strip().startswith(("script-src", "default-src")))
        assert "'unsafe-inline'" not in csp and "unsafe-eval" not in csp, path
        assert "'self'" in script
        assert "frame-ancestors 'none'" in csp, path
        assert r.headers.get("X-Content-Type-Options") == "nosniff", path


def _session_cookie(resp) -> str:
    cookies = [v for k, v in resp.headers.items() if k.lower() == "set-cookie" and v.startswith("session=")]
    assert cookies, "no session cookie set"
    return cookies[-1]


@pytest.mark.parametrize("base, secure", [("http://localhost", False), ("https://localhost", True)])
def test_session_cookie_flags(app, base, secure):
    client = app.test_client()
    token = _csrf_of(client.get("/r/login", base_url=base).get_data(as_text=True))
    r = client.post("/r/login", data={"password": PASSWORD, "csrf_token": token}, base_url=base)
    assert r.status_code == 302
    cookie = _session_cookie(r).lower()
    assert "httponly" in cookie and "samesite=lax" in cookie
    assert ("; secure" in cookie) is secure


def test_secret_key_is_per_project_and_private(tmp_path):
    p1, _ = init_project(tmp_path / "one", password=PASSWORD)
    p2, _ = init_project(tmp_path / "two", password=PASSWORD)
    assert p1.secret_key() != p2.secret_key() and len(p1.secret_key()) >= 32
    for p in (p1, p2):
        assert stat.S_IMODE(os.stat(p.secret_path).st_mode) == 0o600
