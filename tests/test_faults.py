"""Faults: a killed server, a killed import or close, two devices at once, a full disk, a read-only file.

The promise under test: an answer the server acknowledged is in the database, and the server never
acknowledges one it did not commit; after any crash the database is whole (``PRAGMA integrity_check``).
"""

from __future__ import annotations

import random
import re
import sqlite3
import subprocess
import sys
import threading
import time

import pytest

from helpers_reliability import (PASSWORD, REPO, LoadLog, Server, build_project, check_log_against_db,
                                 form_csrf, run_judge)
from labelstudy.store import Store
from labelstudy.web import NOT_SAVED_RETRYING, create_app


def integrity(db) -> str:
    conn = sqlite3.connect(db)
    try:
        return conn.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        conn.close()


# ---------------------------------------------------------------------------------------------- SIGKILL
@pytest.mark.slow
def test_server_killed_five_times_under_load_keeps_every_acknowledged_answer(tmp_path):
    built = build_project(tmp_path / "p", n_judges=10, n_items=20)
    built.store.close()
    db = built.path / "labelstudy.sqlite"
    log = LoadLog()
    csrf = {t: form_csrf(built.project, t) for t in built.tokens}
    failures: list[BaseException] = []
    in_flight_at_kill = []
    server = Server(built.path, log_dir=tmp_path)

    def judge(*args, **kw):
        try:
            run_judge(*args, **kw)
        except BaseException as exc:  # a protocol violation (acknowledged the wrong thing, odd 409...)
            failures.append(exc)

    rng = random.Random(7)
    try:
        for cycle in range(5):
            server.start()
            stop = threading.Event()
            before = len(log.latencies)
            threads = [threading.Thread(target=judge, daemon=True, args=(
                server.port, tok, csrf[tok], built.task_id, built.item_ids, built.choices),
                kwargs=dict(n_answers=400, log=log, seed=cycle * 100 + k, deadline=time.monotonic() + 30,
                            stop=stop, sync=True)) for k, tok in enumerate(built.tokens)]
            for t in threads:
                t.start()
            end = time.monotonic() + 15
            while len(log.latencies) < before + 40 + rng.randrange(60) and time.monotonic() < end:
                time.sleep(0.01)
            neterr_before = log.statuses.get("neterr", 0)
            server.kill()                                    # mid-load: requests are in flight
            for t in threads:
                t.join(30)
            stop.set()
            in_flight_at_kill.append(log.statuses.get("neterr", 0) - neterr_before)
            assert not any(t.is_alive() for t in threads)
            assert integrity(db) == "ok", f"after kill {cycle + 1}"
    finally:
        server.kill()
    assert not failures, failures[:3]
    assert sum(in_flight_at_kill) >= 5, f"the kills should interrupt requests: {in_flight_at_kill}"
    assert not any(isinstance(k, int) and k >= 500 for k in log.statuses), log.statuses
    result = check_log_against_db(log, db)
    assert result["acked"] > 100
    assert result["lost"] == [], result["lost"][:5]
    assert result["foreign"] == [], result["foreign"][:5]      # every row came from a request that was sent
    assert result["half"] == [], result["half"][:5]
    # and a restarted server serves exactly what is stored
    server2 = Server(built.path, log_dir=tmp_path)
    try:
        server2.start()
        from helpers_reliability import JudgeClient, db_answers
        rows = db_answers(db)
        for tok in built.tokens[:3]:
            c = JudgeClient(server2.port, tok)
            served = {(tok, a["task_id"], a["item"]): (a["revision"], a["value"]) for a in c.state()["answers"]}
            c.close()
            assert served == {k: (r["revision"], r["value"]) for k, r in rows.items() if k[0] == tok}
    finally:
        server2.kill()


# ---------------------------------------------------------------------------------------------- killed writers
CHILD = r"""
import sys, time
sys.path[:0] = [{repo!r}, {tests!r}]
from labelstudy.store import Store
from helpers_reliability import orchard_solution
db, mode, what = sys.argv[1], sys.argv[2], sys.argv[3]
store = Store(db, create=False)
solution = orchard_solution(3000, 12) if what == "import" else None
if mode == "sleep-inside":
    real = store._event
    def event(c, kind, **kw):
        real(c, kind, **kw)          # the last statement of the transaction: everything is written, nothing committed
        print("inside", flush=True)
        time.sleep(120)
    store._event = event
print("start", flush=True)
if what == "import":
    store.create_study("Big import", solution)
else:
    store.close_round(int(sys.argv[4]))
print("done", flush=True)
"""


def _child(db, mode, what, *extra):
    code = CHILD.format(repo=str(REPO), tests=str(REPO / "tests"))
    return subprocess.Popen([sys.executable, "-c", code, str(db), mode, what, *map(str, extra)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _wait_line(proc, word, timeout=60):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        line = proc.stdout.readline()
        if word in line:
            return
        if not line and proc.poll() is not None:
            raise AssertionError(f"child ended: {proc.stderr.read()[-2000:]}")
    raise AssertionError(f"child never printed {word!r}")


def _study_counts(db) -> list[tuple]:
    conn = sqlite3.connect(db)
    try:
        return conn.execute(
            "SELECT s.id, (SELECT COUNT(*) FROM item i WHERE i.study_id = s.id), "
            "(SELECT COUNT(*) FROM factor f WHERE f.study_id = s.id), "
            "(SELECT COUNT(*) FROM loading l WHERE l.study_id = s.id), "
            "(SELECT COUNT(*) FROM factor_correlation p WHERE p.study_id = s.id), "
            "(SELECT COUNT(*) FROM event e WHERE e.study_id = s.id AND e.kind = 'study_created') "
            "FROM study s ORDER BY s.id").fetchall()
    finally:
        conn.close()


@pytest.mark.slow
def test_a_killed_import_leaves_the_whole_study_or_none(tmp_path):
    built = build_project(tmp_path / "p", n_judges=1, n_items=10)
    built.store.close()
    db = built.path / "labelstudy.sqlite"
    first = _study_counts(db)
    full = (3000, 12, 36000, 144, 1)
    rng = random.Random(3)
    outcomes = []
    for attempt in range(5):
        mode = "sleep-inside" if attempt == 0 else "plain"
        proc = _child(db, mode, "import")
        try:
            _wait_line(proc, "inside" if mode == "sleep-inside" else "start")
            if mode == "plain":
                time.sleep(rng.uniform(0.0, 0.4))
            proc.kill()
            proc.wait(10)
        finally:
            if proc.poll() is None:
                proc.kill()
            proc.stdout.close()
            proc.stderr.close()
        assert integrity(db) == "ok"
        counts = _study_counts(db)
        assert counts[0] == first[0], "the existing study was touched"
        for row in counts[1:]:
            assert row[1:] == full, f"a half-imported study: {row}"
        outcomes.append(len(counts) - 1)
    assert outcomes[0] == 0, "killed inside the transaction: the study must not exist"
    store = Store(db, create=False)
    for sid, *_ in _study_counts(db)[1:]:
        assert len(store.get_solution(sid).items) == 3000
    store.close()


@pytest.mark.slow
def test_a_killed_round_close_leaves_the_round_open_or_closed_whole(tmp_path):
    db_states = []
    for attempt in range(4):
        built = build_project(tmp_path / f"p{attempt}", n_judges=2, n_items=6)
        store = built.store
        before = store.get_round(built.round_id)
        store.close()
        db = built.path / "labelstudy.sqlite"
        mode = "sleep-inside" if attempt == 0 else "plain"
        proc = _child(db, mode, "close", built.round_id)
        try:
            _wait_line(proc, "inside" if mode == "sleep-inside" else "start")
            if mode == "plain":
                time.sleep(random.Random(attempt).uniform(0.0, 0.05))
            proc.kill()
            proc.wait(10)
        finally:
            if proc.poll() is None:
                proc.kill()
            proc.stdout.close()
            proc.stderr.close()
        assert integrity(db) == "ok"
        store = Store(db, create=False)
        after = store.get_round(built.round_id)
        closed_events = [e for e in store.events(limit=1000) if e["kind"] == "round_closed"]
        if after["status"] == "open":
            assert after["closed_at"] is None and after["version"] == before["version"] and not closed_events
        else:
            assert after["status"] == "closed" and after["closed_at"] and after["version"] == before["version"] + 1
            assert len(closed_events) == 1
        db_states.append(after["status"])
        store.close()
    assert db_states[0] == "open", "killed inside the transaction: the round must still be open"


# ---------------------------------------------------------------------------------------------- two devices
@pytest.fixture
def app_built(tmp_path):
    built = build_project(tmp_path / "p", n_judges=2, n_items=8)
    app = create_app(built.path, {"TESTING": True})
    yield app, built
    built.store.close()


def test_a_judge_on_two_devices_never_overwrites_silently(app_built):
    app, built = app_built
    tok = built.tokens[0]
    phone, laptop = app.test_client(), app.test_client()
    h = {"X-CSRF-Token": form_csrf(built.project, tok)}

    def save(client, value, revision):
        return client.post(f"/j/{tok}/save", json={"task_id": built.task_id, "item": "Q001", "value": value,
                                                   "comment": "", "revision": revision}, headers=h)

    assert save(phone, "F1", 1).get_json()["status"] == "saved"
    r = save(laptop, "F2", 1)                     # the laptop never saw the phone's answer
    assert r.status_code == 409
    body = r.get_json()
    assert body["ok"] is False and body["status"] == "conflict" and body["value"] == "F1" and body["revision"] == 1
    assert save(phone, "F1", 1).get_json()["status"] == "unchanged"           # a resend changes nothing
    assert save(laptop, "F2", 2).status_code == 200                           # after reconciling: newer wins
    r = save(phone, "F3", 2)                       # the phone's stale base
    assert r.status_code == 409 and r.get_json()["value"] == "F2"
    r = save(phone, "F4", 1)
    assert r.status_code == 409 and r.get_json()["status"] == "stale" and r.get_json()["revision"] == 2
    rows = built.store.judge_answers(built.judge_ids[0], built.round_id)
    assert [(a["value"], a["revision"]) for a in rows] == [("F2", 2)]
    state = phone.get(f"/j/{tok}/state").get_json()
    assert [(a["value"], a["revision"]) for a in state["answers"]] == [("F2", 2)]


def _login(client) -> None:
    html = client.get("/r/login").get_data(as_text=True)
    tok = re.search(r'name="csrf_token" value="([^"]+)"', html).group(1)
    assert client.post("/r/login", data={"password": PASSWORD, "csrf_token": tok}).status_code == 302


def _factor_form(html: str, fid: str) -> dict:
    form = re.search(r'<form[^>]*action="[^"]*/factors/' + fid + r'"[^>]*>(.*?)</form>', html, re.S).group(1)
    fields = dict(re.findall(r'<input type="hidden" name="([^"]+)" value="([^"]*)"', form))
    return fields


def test_two_researcher_tabs_editing_one_factor(app_built):
    app, built = app_built
    client = app.test_client()
    _login(client)
    page = client.get(f"/r/studies/{built.study_id}").get_data(as_text=True)
    tab1, tab2 = _factor_form(page, "F1"), _factor_form(page, "F1")
    r = client.post(f"/r/studies/{built.study_id}/factors/F1",
                    data={**tab1, "name": "Neighbourliness", "definition": "Tab one's definition."})
    assert r.status_code == 302
    r = client.post(f"/r/studies/{built.study_id}/factors/F1",
                    data={**tab2, "name": "Company", "definition": "Tab two's definition."})
    assert r.status_code == 409
    text = r.get_data(as_text=True)
    assert "changed in another tab" in text and "Company" in text          # the second tab's text is shown
    f1 = built.store.factors(built.study_id)[0]
    assert (f1["name"], f1["definition"]) == ("Neighbourliness", "Tab one's definition.")


# ---------------------------------------------------------------------------------------------- no space
def _no_more_pages(store) -> None:
    conn = store.connect()        # the test client runs requests in this thread: the same connection
    pages = conn.execute("PRAGMA page_count").fetchone()[0]
    conn.execute(f"PRAGMA max_page_count = {pages}")


def _read_only(store, how: str) -> None:
    if how == "query_only":
        store.connect().execute("PRAGMA query_only = 1")
    else:   # a connection opened on the file read-only, as the server would have on a read-only mount
        store.close()
        conn = sqlite3.connect(f"file:{store.path}?mode=ro", uri=True, isolation_level=None,
                               check_same_thread=False)
        conn.row_factory = sqlite3.Row
        store._local.conn = conn


@pytest.mark.parametrize("fault", ["disk_full", "query_only", "mode_ro"])
def test_unwritable_database_gives_503_and_never_acknowledges(app_built, fault):
    app, built = app_built
    store = app.extensions["labelstudy_store"]
    client = app.test_client()
    tok = built.tokens[0]
    h = {"X-CSRF-Token": form_csrf(built.project, tok)}
    client.get(f"/j/{tok}/task/1")
    researcher = app.test_client()
    _login(researcher)
    round_csrf = re.search(r'name="csrf_token" value="([^"]+)"', researcher.get(
        f"/r/studies/{built.study_id}/rounds/new").get_data(as_text=True)).group(1)
    if fault == "disk_full":
        _no_more_pages(store)
    else:
        _read_only(store, "query_only" if fault == "query_only" else "mode_ro")
    acked, refused = [], []
    for k, item in enumerate(built.item_ids):
        r = client.post(f"/j/{tok}/save", json={"task_id": built.task_id, "item": item, "value": "F1",
                                                "comment": ("full disk " * 190)[:1900], "revision": 1}, headers=h)
        assert r.status_code in (200, 503), r.get_data(as_text=True)[:300]
        if r.status_code == 200:
            acked.append(item)
        else:
            assert r.get_json() == {"ok": False, "error": NOT_SAVED_RETRYING}
            refused.append(item)
    assert refused, "the fault should refuse at least one save"
    if fault != "disk_full":
        assert acked == []
    # the researcher's pages say so clearly, and nothing is half-written
    n_rounds = len(built.store.list_rounds(built.study_id))
    r = researcher.post(f"/r/studies/{built.study_id}/rounds/new", data={
        "csrf_token": round_csrf, "task_label_match": "on", "show": "both", "title": "Round 2",
        "instructions": "Read each statement. " * 300, "consent": "Your answers are kept with a code. " * 100})
    assert r.status_code == 503, r.get_data(as_text=True)[:500]
    assert "cannot write to the project database" in r.get_data(as_text=True)
    assert len(built.store.list_rounds(built.study_id)) == n_rounds
    fresh = Store(store.path, create=False)
    stored = {a["item"] for a in fresh.judge_answers(built.judge_ids[0], built.round_id)}
    assert stored == set(acked), "exactly the acknowledged answers are stored"
    assert integrity(store.path) == "ok"
    fresh.close()
    # once space is back, the page's retry goes through
    if fault == "disk_full":
        store.connect().execute("PRAGMA max_page_count = 1073741823")
    else:
        store.close()
    r = client.post(f"/j/{tok}/save", json={"task_id": built.task_id, "item": refused[0], "value": "F1",
                                            "comment": "", "revision": 1}, headers=h)
    assert r.status_code == 200 and r.get_json()["status"] == "saved"


def test_a_researcher_edit_on_a_full_disk_gets_a_clear_page(app_built):
    app, built = app_built
    store = app.extensions["labelstudy_store"]
    client = app.test_client()
    _login(client)
    page = client.get(f"/r/studies/{built.study_id}").get_data(as_text=True)
    form = _factor_form(page, "F2")
    _no_more_pages(store)
    r = client.post(f"/r/studies/{built.study_id}/factors/F2",
                    data={**form, "name": "Skills", "definition": "A long definition. " * 250})
    assert r.status_code == 503
    text = r.get_data(as_text=True)
    assert "cannot write to the project database" in text
    assert "Traceback" not in text
    f2 = built.store.factors(built.study_id)[1]
    assert f2["name"] == "Learning"


def test_a_page_posted_without_javascript_on_a_full_disk_keeps_the_answers(app_built):
    app, built = app_built
    store = app.extensions["labelstudy_store"]
    client = app.test_client()
    tok = built.tokens[0]
    page = client.get(f"/j/{tok}/task/1").get_data(as_text=True)
    csrf = re.search(r'name="csrf_token" value="([^"]+)"', page).group(1)
    _no_more_pages(store)
    data = {"csrf_token": csrf, "go": "next"}
    for item in built.item_ids:
        data[f"v__{item}"] = "F2"
        data[f"c__{item}"] = "A note that fills the disk. " * 60
    r = client.post(f"/j/{tok}/task/1", data=data)
    assert r.status_code == 503
    text = r.get_data(as_text=True)
    assert "Not saved: the server cannot write just now" in text
    assert text.count('value="F2" checked') == len(built.item_ids)          # every choice still on the page
    assert Store(store.path, create=False).judge_answers(built.judge_ids[0], built.round_id) == []
