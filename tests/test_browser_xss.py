"""Hostile text is inert in a real browser, and an unwritable database shows "Not saved, retrying".

Item texts, factor names and definitions, the study and round texts, judge names, pile names and comments
carry script payloads that would set ``window.__xss`` or open a dialog if they ever ran. Every judge and
researcher page (results included) is opened in Debian's chromium through Playwright against a waitress
server in a thread on 127.0.0.1; no dialog may open, no page error or console error may appear (a
Content-Security-Policy report would mean markup was injected even if CSP stopped it), the flag stays
unset and no link points at ``javascript:``.
"""

from __future__ import annotations

import threading

import pytest

from helpers_reliability import PASSWORD
from labelstudy.project import init_project
from labelstudy.solution import Factor, Item, Solution
from labelstudy.web import NOT_SAVED_RETRYING, create_app
from tests.helpers_browser import (BROWSER_MARKS, SHOTS, WAIT, browser, expect, serve,  # noqa: F401
                                   sync_api)

pytestmark = BROWSER_MARKS


PAYLOADS = [
    "<script>window.__xss='script';alert(1)</script>",
    "<img src=x onerror=\"window.__xss='img';alert(2)\">",
    "\"><svg onload=\"window.__xss='svg';alert(3)\">",
    "javascript:window.__xss='url';alert(4)",
    "' onmouseover='window.__xss=\"attr\"' autofocus onfocus='window.__xss=\"focus\"' x='",
    "</textarea></script><script>window.__xss='close';alert(5)</script>",
    "<a href=\"javascript:alert(6)\">click</a>",
]


def _p(k: int) -> str:
    return PAYLOADS[k % len(PAYLOADS)]


@pytest.fixture(scope="module")
def site(tmp_path_factory):

    path = tmp_path_factory.mktemp("xss") / "p"
    project, _ = init_project(path, password=PASSWORD)
    store = project.store()
    fids = ["F1", "F2", "F3"]
    factors = tuple(Factor(f, f"Factor {f} {_p(i)}", f"Definition {f}: {_p(i + 3)}") for i, f in enumerate(fids))
    items = tuple(Item(id=f"Q{i + 1}", text=f"Statement {i + 1} {_p(i)}",
                       loadings=tuple((f, 0.7 if j == i % 3 else 0.1) for j, f in enumerate(fids)),
                       reverse_keyed=False) for i in range(7))
    sol = Solution(items=items, factors=factors, phi=None, meta=(("rotation", _p(2)),), source=_p(1), notes=())
    sid = store.create_study("Orchard " + _p(0), sol)
    rid = store.create_round(sid, tasks=[("open_sort", {"max_piles": 3}), ("label_match", {"show": "both"}),
                                         ("naming", {"candidates": {"F1": [_p(4)], "F2": [_p(5)], "F3": ["Care"]}})],
                             title="Round " + _p(1), instructions="Read. " + _p(0) + "\n\n" + _p(5),
                             consent="Consent " + _p(2), seed=3)
    store.open_round(rid)
    hostile = store.add_judge(rid, _p(1), email="x@example.org", expertise=_p(4))
    plain = store.add_judge(rid, "Judge Plain")
    for inv in (hostile, plain):
        store.record_consent(inv["judge_id"], rid)
    tasks = store.tasks(rid)
    jid = hostile["judge_id"]
    store.save_answer(jid, rid, tasks[0]["id"], "Q1", "1", _p(0), revision=1)
    store.save_answer(jid, rid, tasks[0]["id"], "pile:1", _p(1), _p(2), revision=1)
    store.save_answer(jid, rid, tasks[1]["id"], "Q2", "F1", _p(5), revision=1)
    store.save_answer(jid, rid, tasks[2]["id"], "F1|name", _p(6), _p(3), revision=1)
    store.close()

    app = create_app(path, {"TESTING": True})
    app_store = app.extensions["labelstudy_store"]
    read_only = threading.Event()
    real_connect = app_store.connect

    def connect():
        # a test switch: makes every server connection refuse writes (SQLITE_READONLY), as a read-only file does
        conn = real_connect()
        conn.execute(f"PRAGMA query_only = {1 if read_only.is_set() else 0}")
        return conn
    app_store.connect = connect
    with serve(app) as base:
        yield {"base": base, "sid": sid, "rid": rid, "hostile": hostile, "plain": plain,
               "read_only": read_only, "app": app, "path": path, "judge_ids": (jid, plain["judge_id"])}


class Watch:
    def __init__(self, page):
        self.dialogs, self.errors = [], []
        page.on("dialog", lambda d: (self.dialogs.append(d.message), d.dismiss()))
        page.on("pageerror", lambda e: self.errors.append(f"pageerror: {e}"))
        page.on("console", lambda m: self.errors.append(f"console: {m.text}")
                if m.type == "error" and "Failed to load resource" not in m.text else None)
        # failed loads are judged by URL: only the browser's own favicon request may 404
        page.on("response", lambda r: self.errors.append(f"{r.status} {r.url}")
                if r.status >= 400 and not r.url.endswith("/favicon.ico") else None)


def _visit(page, watch, url, problems):
    resp = page.goto(url)
    page.wait_for_load_state("load")
    page.wait_for_timeout(150)
    # fire any injected inline handler (onmouseover, onfocus, onload, onerror) on every element
    page.evaluate("() => document.querySelectorAll('body *').forEach(el => ['mouseover', 'focus', 'load', "
                  "'error'].forEach(t => el.dispatchEvent(new Event(t))))")
    flag = page.evaluate("() => window.__xss === undefined ? null : String(window.__xss)")
    js_links = page.evaluate("() => Array.from(document.querySelectorAll('a[href]'))"
                             ".filter(a => a.href.trim().toLowerCase().startsWith('javascript:')).length")
    injected = page.evaluate("() => document.querySelectorAll('img[src=x], svg[onload], [onerror], [onmouseover], "
                             "[onfocus], [onload]').length")
    if resp is None or resp.status >= 500:
        problems.append(f"{url}: status {resp.status if resp else None}")
    if flag or js_links or injected:
        problems.append(f"{url}: flag={flag} javascript-links={js_links} injected-elements={injected}")
    return resp


def test_payloads_are_inert_on_every_page(site, browser):
    ctx = browser.new_context()
    ctx.set_default_timeout(WAIT)
    page = ctx.new_page()
    watch = Watch(page)
    problems: list[str] = []
    tok = site["hostile"]["token"]
    base, rid, sid = site["base"], site["rid"], site["sid"]
    judge_pages = [f"/j/{tok}", f"/j/{tok}/task/1", f"/j/{tok}/task/2", f"/j/{tok}/task/3", f"/j/{tok}/review"]
    for path in judge_pages:
        _visit(page, watch, base + path, problems)
    # the payloads show as text, literally
    page.goto(base + f"/j/{tok}/task/2")
    body = page.inner_text("body")
    assert "<script>window.__xss='script';alert(1)</script>" in body
    assert "<img src=x onerror=" in body

    page.goto(base + "/r/login")
    page.fill("input[name=password]", PASSWORD)
    page.locator("form button[type=submit], form input[type=submit]").first.click()
    page.wait_for_url("**/r/**")
    researcher_pages = ["/r/", f"/r/studies/{sid}", f"/r/rounds/{rid}", f"/r/rounds/{rid}/invitations",
                        f"/r/rounds/{rid}/plan?judges=4", f"/r/studies/{sid}/rounds/new"]
    if "results.round_results" in site["app"].view_functions:
        researcher_pages.append(f"/r/rounds/{rid}/results")
    for path in researcher_pages:
        resp = _visit(page, watch, base + path, problems)
        assert resp.status == 200, f"{path}: {resp.status}"
    page.goto(base + f"/r/studies/{sid}")
    assert "Statement 1 <script>window.__xss='script';alert(1)</script>" in page.inner_text("body")
    ctx.close()
    assert watch.dialogs == [], watch.dialogs
    assert watch.errors == [], watch.errors[:5]
    assert problems == [], problems


def test_unwritable_database_shows_not_saved_retrying_then_saves(site, browser):
    ctx = browser.new_context()
    ctx.set_default_timeout(WAIT)
    page = ctx.new_page()
    seen_503 = []
    page.on("response", lambda r: seen_503.append(r) if r.status == 503 and r.url.endswith("/save") else None)
    tok = site["plain"]["token"]
    page.goto(site["base"] + f"/j/{tok}/task/2")
    page.locator('#task-form[data-js-ready="1"]').wait_for(state="attached")
    site["read_only"].set()
    try:
        radio = page.locator("input[type=radio]").first
        radio.check()
        unit = radio.locator("xpath=ancestor::*[@data-key][1]")
        key, uid = unit.get_attribute("data-key"), unit.get_attribute("id")
        state = page.locator(f"#{uid}-state")
        sync_api.expect(state).to_have_text("Not saved, retrying", timeout=WAIT)
        assert seen_503 and seen_503[0].json() == {"ok": False, "error": NOT_SAVED_RETRYING}
        from labelstudy.store import Store
        probe = Store(site["path"] / "labelstudy.sqlite", create=False)
        assert not [a for a in probe.judge_answers(site["judge_ids"][1], site["rid"]) if a["item"] == key], \
            "an answer was stored while the database refused writes"
    finally:
        site["read_only"].clear()
    sync_api.expect(state).to_have_text("Saved", timeout=WAIT)      # the page's own retry
    rows = [a for a in probe.judge_answers(site["judge_ids"][1], site["rid"]) if a["item"] == key]
    assert len(rows) == 1 and rows[0]["revision"] == 1
    probe.close()
    ctx.close()
