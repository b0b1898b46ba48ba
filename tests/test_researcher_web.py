"""Researcher pages: login, uploads, wording edits, composing rounds, judges, links, QR, lifecycle, plan.

Every POST here carries a real CSRF token read from a page (CSRF protection stays on).
"""

from __future__ import annotations

import html
import json
import re
import xml.etree.ElementTree as ET

import pytest
from click.testing import CliRunner
from helpers_researcher import (ITEMS, Researcher, app, csrf_from, csv_items_bytes, json_bytes,  # noqa: F401
                                make_round, researcher, study_id, template_project, web_store, xlsx_bytes)

from labelstudy.errors import FormInputError
from labelstudy.web.forms import parse_judge_lines, parse_round_form


def text(resp) -> str:
    """The page with HTML entities decoded (so quotes in messages read as typed)."""
    return html.unescape(resp.get_data(as_text=True))


def raw(resp) -> str:
    return resp.get_data(as_text=True)


# ---------------------------------------------------------------------------------------------- login
def _dummy_args(rule) -> dict:
    values = {"sid": 1, "rid": 1, "jid": 1, "fid": "F1", "iid": "q1", "action": "open"}
    return {a: values[a] for a in rule.arguments}


def test_every_researcher_route_requires_login(app):
    client = app.test_client()
    token = csrf_from(text(client.get("/r/login")))    # a valid token of this (anonymous) session
    rules = [r for r in app.url_map.iter_rules() if r.endpoint.startswith("researcher.")]
    assert {"researcher.index", "researcher.new_study", "researcher.study", "researcher.edit_factor",
            "researcher.edit_item", "researcher.new_round", "researcher.round_page", "researcher.add_judges",
            "researcher.change_status", "researcher.revoke", "researcher.invitations", "researcher.judge_qr",
            "researcher.plan"} <= {r.endpoint for r in rules}
    for rule in rules:
        with app.test_request_context():
            from flask import url_for
            url = url_for(rule.endpoint, **_dummy_args(rule))
        for method in sorted(rule.methods & {"GET", "POST"}):
            resp = client.open(url, method=method, data={"csrf_token": token} if method == "POST" else None)
            assert resp.status_code == 302, (method, url, resp.status_code)
            assert "/r/login" in resp.headers["Location"], (method, url)


def test_login_form_then_pages(app, web_store):
    client = app.test_client()
    Researcher(client).login()                                     # the real form, with its CSRF token
    resp = Researcher(client).upload(json_bytes(), "orchard.json")
    assert resp.status_code == 302
    sid = web_store.list_studies()[-1]["id"]
    page = text(client.get("/r/"))
    assert "Orchard motives" in page and f"/r/studies/{sid}" in page


def test_post_without_csrf_token_is_refused_and_changes_nothing(researcher, study_id, web_store):
    rid = make_round(web_store, study_id)
    resp = researcher.client.post(f"/r/rounds/{rid}/judges", data={"judges": "Ada"})
    assert resp.status_code == 400
    assert web_store.invitations(rid) == []


# ---------------------------------------------------------------------------------------------- uploads
@pytest.mark.parametrize("maker,filename,has_definitions", [
    (json_bytes, "orchard.json", True), (xlsx_bytes, "orchard.xlsx", True), (csv_items_bytes, "items.csv", False)])
def test_upload_each_format(researcher, web_store, maker, filename, has_definitions):
    resp = researcher.upload(maker(), filename, title="Spring survey")
    assert resp.status_code == 302, text(resp)
    sid = web_store.list_studies()[-1]["id"]
    assert [i["item_id"] for i in web_store.items(sid)] == [i for i, _, _ in ITEMS]
    page = text(researcher.client.get(resp.headers["Location"]))
    assert "Spring survey" in page
    assert "I look forward to picking apples in autumn." in page
    assert "0.72" in page                                          # loadings are shown
    factors = web_store.factors(sid)
    assert [f["factor_id"] for f in factors] == ["F1", "F2", "F3"]
    if has_definitions:
        assert "Harvest joy" in page and "Factors without a definition" not in page
    else:   # a single items table: factors named by the headers, definitions still to write
        assert all(f["definition"] == "" for f in factors)
        assert "Factors without a definition: F1, F2, F3" in page
        assert "no factors table" in page                          # the importer's note


def test_study_page_diagnosis_in_words(researcher, study_id):
    page = text(researcher.client.get(f"/r/studies/{study_id}"))
    row = page[page.index('id="item-q2"'):page.index('id="item-q3"')]
    assert "cross-loading: the second loading is large" in row     # q2: F3 = .31 >= .30
    assert "F1 (0.65)" in row and "F3 (0.31)" in row               # primary and secondary, signed
    assert "cross-loading items (judges may place them under either factor): q2" in page
    f3 = page[page.index('id="factor-F3"'):page.index('id="items"')]
    assert re.search(r'class="num">3</td>', f3)                    # q7, q8, q9 (.41) are salient


@pytest.mark.parametrize("content,filename,expected", [
    (b"item,F1,F2\nq1,0.5,0.1\nq2,0.1,0.6\n", "items.csv", "no item text column"),
    (b"item,text,F1,F2\nq1,Apples,1.3,0.1\nq2,Pears,0.1,0.6\n", "items.csv", "Heywood case"),
    (b"whatever", "notes.docx", "unknown file type"),
    (b"{not json", "broken.json", "broken.json"),
    (b"", "empty.csv", "the file is empty"),
    (b"PK not really a zip", "book.xlsx", "not a valid .xlsx workbook"),
])
def test_refused_uploads_show_the_importer_message(researcher, web_store, content, filename, expected):
    resp = researcher.upload(content, filename, title="Kept title")
    assert resp.status_code == 400
    page = text(resp)
    assert expected in page and "Nothing was stored" in page
    assert 'value="Kept title"' in page                            # the form is kept
    assert "Traceback" not in page
    assert web_store.list_studies() == []


def test_upload_without_a_file_is_refused(researcher):
    resp = researcher.post("/r/studies/new", {"title": "x"}, page="/r/studies/new")
    assert resp.status_code == 400 and "Choose a solution file" in text(resp)


def test_unknown_records_give_the_not_found_page(researcher, study_id, web_store):
    rid = make_round(web_store, study_id)
    for url in ("/r/studies/999", "/r/rounds/999", "/r/rounds/999/plan", f"/r/rounds/{rid}/judges/5/qr.svg",
                "/r/studies/999/rounds/new"):
        resp = researcher.client.get(url)
        assert resp.status_code == 404 and "There is nothing at this address" in text(resp), url
    resp = researcher.post(f"/r/studies/{study_id}/factors/F9", {"name": "x", "version": "1"})
    assert resp.status_code == 404


# ---------------------------------------------------------------------------------------------- edits
def test_edit_factor_saves_and_stale_version_is_refused(researcher, study_id, web_store):
    url = f"/r/studies/{study_id}/factors/F1"
    page = f"/r/studies/{study_id}"
    resp = researcher.post(url, {"name": "Fruit joy", "definition": "Pleasure in the harvest.", "version": "1"},
                           page=page)
    assert resp.status_code == 302
    f1 = web_store.factors(study_id)[0]
    assert (f1["name"], f1["definition"], f1["version"]) == ("Fruit joy", "Pleasure in the harvest.", 2)
    # a second tab still holding version 1
    resp = researcher.post(url, {"name": "Old tab name", "definition": "Old tab text", "version": "1"}, page=page)
    assert resp.status_code == 409
    body = text(resp)
    assert "changed in another tab" in body and "Nothing was overwritten" in body
    assert "Fruit joy" in body and "Pleasure in the harvest." in body      # the current text
    assert "Old tab name" in body                                          # and what the user typed
    f1 = web_store.factors(study_id)[0]
    assert (f1["name"], f1["version"]) == ("Fruit joy", 2)


def test_edit_factor_empty_name_refused_with_message(researcher, study_id, web_store):
    resp = researcher.post(f"/r/studies/{study_id}/factors/F2", {"name": " ", "definition": "x", "version": "1"},
                           page=f"/r/studies/{study_id}")
    assert resp.status_code == 400 and "the name cannot be empty" in text(resp)
    assert web_store.factors(study_id)[1]["name"] == "Tree care"


def test_edit_item_and_stale_item(researcher, study_id, web_store):
    url, page = f"/r/studies/{study_id}/items/q4", f"/r/studies/{study_id}"
    assert researcher.post(url, {"text": "I enjoy pruning young trees.", "version": "1"}, page=page).status_code == 302
    resp = researcher.post(url, {"text": "Other tab", "version": "1"}, page=page)
    assert resp.status_code == 409
    assert "changed in another tab" in text(resp) and "I enjoy pruning young trees." in text(resp)
    assert web_store.items(study_id)[3]["text"] == "I enjoy pruning young trees."


def test_edit_after_opening_is_allowed_and_keeps_the_snapshot(researcher, study_id, web_store):
    rid = make_round(web_store, study_id)
    web_store.open_round(rid)
    page = text(researcher.client.get(f"/r/studies/{study_id}"))
    assert "changes apply to rounds opened later" in page
    resp = researcher.post(f"/r/studies/{study_id}/factors/F1", {"name": "Fruit joy", "definition": "d",
                                                                 "version": "1"}, page=f"/r/studies/{study_id}")
    assert resp.status_code == 302
    assert web_store.round_solution(rid).factors[0].name == "Harvest joy"


# ---------------------------------------------------------------------------------------------- compose
def test_compose_round_with_every_task_kind(researcher, study_id, web_store):
    page = text(researcher.client.get(f"/r/studies/{study_id}/rounds/new"))
    assert "Thank you for taking part" in page and 'value="Round 1"' in page      # defaults prefilled
    orders = {"open_sort": 6, "label_match": 1, "relevance": 5, "essentiality": 4, "definition_fit": 3,
              "naming": 2}
    data = {"title": "Pilot", "show": "name", "none_option": "on", "max_piles": "8",
            "candidates_F1": "Fruit joy\n\nHarvest fun\n", "candidates_F2": "", "candidates_F3": "Street ties",
            "instructions": "Please sort.", "consent": "I agree.", "deadline": "2999-12-31"}
    for kind, n in orders.items():
        data[f"task_{kind}"] = "on"
        data[f"order_{kind}"] = str(n)
    resp = researcher.post(f"/r/studies/{study_id}/rounds/new", data, page=f"/r/studies/{study_id}/rounds/new")
    assert resp.status_code == 302, text(resp)
    rnd = web_store.list_rounds(study_id)[0]
    assert (rnd["title"], rnd["instructions"], rnd["consent"], rnd["deadline"]) == \
        ("Pilot", "Please sort.", "I agree.", "2999-12-31")
    tasks = web_store.tasks(rnd["id"])
    assert [t["kind"] for t in tasks] == sorted(orders, key=orders.get)
    cfg = {t["kind"]: t["config"] for t in tasks}
    assert cfg["label_match"]["show"] == "name" and cfg["label_match"]["none_option"] is True
    assert cfg["open_sort"]["max_piles"] == 8
    assert cfg["naming"]["candidates"] == {"F1": ["Fruit joy", "Harvest fun"], "F2": [], "F3": ["Street ties"]}
    assert resp.headers["Location"].endswith(f"/r/rounds/{rnd['id']}")


@pytest.mark.parametrize("change,expected", [
    ({"task_label_match": None, "task_relevance": None}, "choose at least one task"),
    ({"task_open_sort": "on", "max_piles": "1"}, "pile limit must be a whole number from 2 to 40"),
    ({"task_open_sort": "on", "max_piles": "many"}, "pile limit must be a whole number from 2 to 40"),
    ({"deadline": "31/12/2999"}, "is not a date"),
    ({"deadline": "2001-01-01"}, "is in the past"),
    ({"show": "everything"}, "label matching: choose what judges see"),
    ({"order_relevance": "first"}, "the order must be a whole number"),
    ({"consent": "  "}, "the consent text is empty"),
])
def test_compose_round_refusals_keep_the_form(researcher, study_id, web_store, change, expected):
    data = {"title": "Kept", "task_label_match": "on", "task_relevance": "on", "order_label_match": "1",
            "order_relevance": "2", "show": "both", "max_piles": "12", "instructions": "Go.", "consent": "OK."}
    data.update(change)
    data = {k: v for k, v in data.items() if v is not None}
    resp = researcher.post(f"/r/studies/{study_id}/rounds/new", data, page=f"/r/studies/{study_id}/rounds/new")
    assert resp.status_code == 400
    assert expected in text(resp) and 'value="Kept"' in text(resp)
    assert web_store.list_rounds(study_id) == []


def test_parse_round_form_ties_keep_listed_order():
    plan = parse_round_form({"task_relevance": "on", "task_label_match": "on", "order_relevance": "1",
                             "order_label_match": "1", "show": "both", "instructions": "a", "consent": "b"}, [])
    assert [k for k, _ in plan.tasks] == ["label_match", "relevance"]


# ---------------------------------------------------------------------------------------------- judges
def test_add_judges_good_lines(researcher, study_id, web_store):
    rid = make_round(web_store, study_id)
    lines = "Ada Orchard, ada@example.org, pomologist\n\nJ02\nBen Pear, grafting\nCara Quince, , soil ecology"
    resp = researcher.post(f"/r/rounds/{rid}/judges", {"judges": lines}, page=f"/r/rounds/{rid}")
    assert resp.status_code == 302
    inv = web_store.invitations(rid)
    assert [(i["display_name"], i["email"], i["expertise"]) for i in inv] == [
        ("Ada Orchard", "ada@example.org", "pomologist"), ("J02", "", ""), ("Ben Pear", "", "grafting"),
        ("Cara Quince", "", "soil ecology")]
    page = text(researcher.client.get(f"/r/rounds/{rid}"))
    assert page.count("not started") == 4


@pytest.mark.parametrize("lines,expected", [
    ("Ada, ada@example.org\nBen, not-an-email, x", "line 2: 'not-an-email' is not an e-mail address"),
    ("Ada\n, b@example.org", "line 2: the display name (or an anonymous code) is missing"),
    ("Ada\nBen, b@example.org, x, y", "line 2: 4 fields"),
    ("Ada\n\nada", "line 3: 'ada' is also on line 1"),
    ("   \n", "no judges given"),
])
def test_add_judges_bad_line_adds_nothing(researcher, study_id, web_store, lines, expected):
    rid = make_round(web_store, study_id)
    resp = researcher.post(f"/r/rounds/{rid}/judges", {"judges": lines}, page=f"/r/rounds/{rid}")
    assert resp.status_code == 400
    page = text(resp)
    assert expected in page and "No judges were added" in page
    assert web_store.invitations(rid) == []
    if lines.strip():
        assert lines.splitlines()[0] in page                       # the textarea keeps the input


def test_add_judge_already_on_panel_refused(researcher, study_id, web_store):
    rid = make_round(web_store, study_id)
    web_store.add_judges(rid, [("Ada", "", "")])
    resp = researcher.post(f"/r/rounds/{rid}/judges", {"judges": "Ben\nADA"}, page=f"/r/rounds/{rid}")
    assert resp.status_code == 400 and "line 2: 'ADA' is already on this round's panel" in text(resp)
    assert len(web_store.invitations(rid)) == 1


def test_store_add_judges_is_one_transaction(web_store, study_id):
    from labelstudy.errors import StoreError
    rid = make_round(web_store, study_id)
    with pytest.raises(StoreError, match="judge 2"):
        web_store.add_judges(rid, [("Ada", "", ""), ("  ", "", "")])
    assert web_store.invitations(rid) == []


def test_parse_judge_lines_two_fields():
    rows = parse_judge_lines("Ada, ada@example.org\nBen, grafting")
    assert [(r.email, r.expertise) for r in rows] == [("ada@example.org", ""), ("", "grafting")]
    with pytest.raises(FormInputError, match="line 1"):
        parse_judge_lines("x" * 121)


# ---------------------------------------------------------------------------------------------- links and QR
def test_dashboard_links_qr_and_revoke(app, researcher, study_id, web_store):
    app.config["BASE_URL"] = "https://orchard.example.test/"
    rid = make_round(web_store, study_id)
    ada, ben = web_store.add_judges(rid, [("Ada", "", "pomology"), ("Ben", "", "")])
    page = text(researcher.client.get(f"/r/rounds/{rid}"))
    assert f"https://orchard.example.test/j/{ada['token']}" in page
    assert f"/r/rounds/{rid}/judges/{ada['judge_id']}/qr.svg" in page
    assert "pomology" in page
    resp = researcher.client.get(f"/r/rounds/{rid}/judges/{ada['judge_id']}/qr.svg")
    assert resp.status_code == 200 and resp.mimetype == "image/svg+xml"
    root = ET.fromstring(resp.data)                                # well-formed SVG
    assert root.tag.endswith("svg") and b"<path" in resp.data
    assert researcher.client.get(f"/r/rounds/{rid}/judges/9999/qr.svg").status_code == 404
    # revoke
    resp = researcher.post(f"/r/rounds/{rid}/judges/{ben['judge_id']}/revoke", page=f"/r/rounds/{rid}")
    assert resp.status_code == 302
    assert web_store.invitation_for(ben["judge_id"], rid)["status"] == "revoked"
    page = text(researcher.client.get(f"/r/rounds/{rid}"))
    assert "revoked" in page and ben["token"] not in page
    resp = researcher.post(f"/r/rounds/{rid}/judges/{ben['judge_id']}/revoke", page=f"/r/rounds/{rid}")
    assert resp.status_code == 400 and "already withdrawn" in text(resp)


def test_invitation_sheet_lists_every_active_judge(app, researcher, study_id, web_store):
    app.config["BASE_URL"] = "https://orchard.example.test"
    rid = make_round(web_store, study_id)
    names = ["Ada Orchard", "<b>Bold</b> & Co", "J03", "Dee", "Eli"]
    invs = web_store.add_judges(rid, [(n, "", "") for n in names])
    page = raw(researcher.client.get(f"/r/rounds/{rid}/invitations"))
    assert page.count('class="invite-card"') == 5
    assert page.count("<svg") == 5 and page.count('class="card-group"') == 2      # groups of four
    for inv in invs:
        assert f"https://orchard.example.test/j/{inv['token']}" in page
    assert "&lt;b&gt;Bold&lt;/b&gt; &amp; Co" in page and "<b>Bold</b>" not in page
    assert "@media print" in text(researcher.client.get("/static/researcher.css"))


# ---------------------------------------------------------------------------------------------- lifecycle
def test_open_close_reopen_and_refusals(researcher, study_id, web_store):
    rid = make_round(web_store, study_id)
    page = f"/r/rounds/{rid}"
    for action, expected in (("close", "Only an open round can be closed; this round is draft"),
                             ("reopen", "Only a closed round can be reopened; this round is draft")):
        resp = researcher.post(f"/r/rounds/{rid}/{action}", page=page)
        assert resp.status_code == 400 and expected in text(resp)
    assert researcher.post(f"/r/rounds/{rid}/open", page=page).status_code == 302
    assert web_store.get_round(rid)["status"] == "open"
    resp = researcher.post(f"/r/rounds/{rid}/reopen", page=page)
    assert resp.status_code == 400 and "Only a closed round can be reopened; this round is open" in text(resp)
    resp = researcher.post(f"/r/rounds/{rid}/open", page=page)
    assert resp.status_code == 400 and "Only a draft round can be opened" in text(resp)
    assert researcher.post(f"/r/rounds/{rid}/close", page=page).status_code == 302
    assert web_store.get_round(rid)["status"] == "closed"
    resp = researcher.post(f"/r/rounds/{rid}/open", page=page)
    assert resp.status_code == 400 and "A closed round can be reopened" in text(resp)
    assert researcher.post(f"/r/rounds/{rid}/reopen", page=page).status_code == 302
    assert web_store.get_round(rid)["status"] == "open"
    assert "Reopen round" not in text(researcher.client.get(page))


@pytest.mark.parametrize("kinds,show,opens", [
    (("label_match",), "definition", False), (("label_match",), "both", False),
    (("definition_fit",), "both", False), (("label_match", "open_sort"), "name", True),
])
def test_opening_refused_while_shown_definitions_are_empty(researcher, web_store, kinds, show, opens):
    researcher.upload(csv_items_bytes(), "items.csv")
    sid = web_store.list_studies()[-1]["id"]
    rid = make_round(web_store, sid, kinds=kinds, show=show)
    resp = researcher.post(f"/r/rounds/{rid}/open", page=f"/r/rounds/{rid}")
    if opens:
        assert resp.status_code == 302 and web_store.get_round(rid)["status"] == "open"
    else:
        assert resp.status_code == 400
        assert "no definition yet: F1, F2, F3" in text(resp)
        assert web_store.get_round(rid)["status"] == "draft"


def test_dashboard_status_words(researcher, study_id, web_store):
    rid = make_round(web_store, study_id, kinds=("label_match", "relevance"))
    ada, ben, cy = web_store.add_judges(rid, [("Ada", "", ""), ("Ben", "", ""), ("Cy", "", "")])
    web_store.open_round(rid)
    lm, rel = web_store.tasks(rid)
    web_store.save_answers(ada["judge_id"], rid, [(lm["id"], "q1", "F1", "", 1, None),
                                                  (rel["id"], "q1", "4", "", 1, None),
                                                  (rel["id"], "q2", None, "just a note", 1, None)])
    answers = [(lm["id"], i, "F1", "", 1, None) for i, _, _ in ITEMS]
    answers += [(rel["id"], i, "3", "", 1, None) for i, _, _ in ITEMS]
    web_store.save_answers(ben["judge_id"], rid, answers)
    web_store.submit(ben["judge_id"], rid)
    page = text(researcher.client.get(f"/r/rounds/{rid}"))
    rows = re.findall(r'<td class="judge-status">([^<]*)</td>', page)
    # 9 items x 2 tasks = 18 required answers; a comment without a value does not count
    assert rows == ["2 of 18 answered", "submitted", "not started"]


def test_results_link_only_when_results_page_exists(app, researcher, study_id, web_store):
    rid = make_round(web_store, study_id)
    page = text(researcher.client.get(f"/r/rounds/{rid}"))
    assert (f"/r/rounds/{rid}/results" in page) == ("results.round_results" in app.view_functions)


# ---------------------------------------------------------------------------------------------- planning
def test_plan_page_and_dashboard_plan(researcher, study_id, web_store):
    from labelstudy.agreement.planning import plan_panel
    rid = make_round(web_store, study_id)
    expected = plan_panel(6, len(ITEMS), 3, n_sim=200, seed=7).messages
    page = text(researcher.client.get(f"/r/rounds/{rid}/plan?judges=6"))
    assert "With 6 judges" in page
    for m in expected:
        assert m in page
    for bad, words in (("abc", "must be a whole number"), ("1", "between 2 and 500")):
        resp = researcher.client.get(f"/r/rounds/{rid}/plan?judges={bad}")
        assert resp.status_code == 400 and words in text(resp)
    assert "fewer than two judges" in text(researcher.client.get(f"/r/rounds/{rid}"))
    web_store.add_judges(rid, [(f"J{k}", "", "") for k in range(1, 7)])
    page = text(researcher.client.get(f"/r/rounds/{rid}"))
    assert expected[0] in page


# ---------------------------------------------------------------------------------------------- CLI
def test_cli_links_json(app, web_store, study_id):
    from labelstudy.cli import main
    rid = make_round(web_store, study_id)
    ada, ben = web_store.add_judges(rid, [("Ada", "ada@example.org", ""), ("Ben", "", "")])
    web_store.revoke(ben["judge_id"], rid)
    result = CliRunner().invoke(main, ["links", app.config["PROJECT_DIR"], "--json",
                                       "--base-url", "https://orchard.example.test"])
    assert result.exit_code == 0, result.output
    rows = json.loads(result.output)
    assert [(r["name"], r["email"], r["status"], r["round"]) for r in rows] == [
        ("Ada", "ada@example.org", "not started", 1), ("Ben", "", "revoked", 1)]
    assert rows[0]["link"] == f"https://orchard.example.test/j/{ada['token']}"
    assert {r["study_id"] for r in rows} == {study_id}


def test_carry_over_the_panel_to_a_second_round(researcher, study_id, web_store):
    r1 = make_round(web_store, study_id)
    researcher.post(f"/r/rounds/{r1}/judges", {"judges": "Ada\nBen\nCara"}, page=f"/r/rounds/{r1}")
    r2 = web_store.create_round(study_id, tasks=[("label_match", {})], seed=11)
    page = text(researcher.client.get(f"/r/rounds/{r2}"))
    assert "Invite the panel of an earlier round" in page
    resp = researcher.post(f"/r/rounds/{r2}/judges/carry-over", {"from_round": str(r1)}, page=f"/r/rounds/{r2}")
    assert resp.status_code == 302
    assert [i["display_name"] for i in web_store.invitations(r2)] == ["Ada", "Ben", "Cara"]
    bad = researcher.post(f"/r/rounds/{r2}/judges/carry-over", {"from_round": "x"}, page=f"/r/rounds/{r2}")
    assert bad.status_code == 400 and "Choose the earlier round" in text(bad)


def test_carry_over_refuses_the_same_or_a_later_round(researcher, study_id, web_store):
    # Found in the browser journey: the server took any round of the study, not only earlier ones.
    r1 = make_round(web_store, study_id)
    r2 = make_round(web_store, study_id)
    researcher.post(f"/r/rounds/{r2}/judges", {"judges": "Ada\nBen"}, page=f"/r/rounds/{r2}")
    for target, source in ((r2, r2), (r1, r2)):   # its own panel; a later round's panel
        resp = researcher.post(f"/r/rounds/{target}/judges/carry-over", {"from_round": str(source)},
                               page=f"/r/rounds/{target}")
        assert resp.status_code == 400, (target, source)
        assert "Choose the earlier round of this study" in text(resp)
    assert web_store.invitations(r1) == []


def test_carry_over_twice_says_that_nobody_was_invited(researcher, study_id, web_store):
    # Found in the browser journey: a second carry-over flashed "0 judges from the earlier round invited".
    r1 = make_round(web_store, study_id)
    researcher.post(f"/r/rounds/{r1}/judges", {"judges": "Ada\nBen"}, page=f"/r/rounds/{r1}")
    r2 = make_round(web_store, study_id)
    first = researcher.post(f"/r/rounds/{r2}/judges/carry-over", {"from_round": str(r1)},
                            page=f"/r/rounds/{r2}", follow_redirects=True)
    assert "2 judges from round 1" in text(first)
    again = researcher.post(f"/r/rounds/{r2}/judges/carry-over", {"from_round": str(r1)},
                            page=f"/r/rounds/{r2}", follow_redirects=True)
    page = text(again)
    assert "Nobody was invited: every active judge of round 1" in page and "0 judges" not in page
    assert len(web_store.invitations(r2)) == 2


def test_results_page_links_back_to_the_study_and_the_round(researcher, study_id, web_store):
    # Found in the browser journey: the results page linked only to the round, never to its study.
    rid = make_round(web_store, study_id)
    page = text(researcher.client.get(f"/r/rounds/{rid}/results"))
    crumbs = re.search(r'<nav class="crumbs".*?</nav>', page, re.S).group(0)
    assert f'href="/r/studies/{study_id}"' in crumbs and "Orchard motives" in crumbs
    assert f'href="/r/rounds/{rid}"' in crumbs


def test_a_second_round_starts_from_the_first_rounds_design(researcher, study_id, web_store):
    web_store.create_round(study_id, tasks=[("relevance", {}), ("label_match", {"show": "name",
                                                                                "none_option": False})],
                           instructions="Rate and sort, round one.", consent="Agreed once.", seed=5)
    page = text(researcher.client.get(f"/r/studies/{study_id}/rounds/new"))
    assert "repeats the design of round 1" in page
    assert "Rate and sort, round one." in page and "Agreed once." in page
    assert re.search(r'name="task_relevance"[^>]*checked', page)
    assert re.search(r'name="task_label_match"[^>]*checked', page)
    assert not re.search(r'name="task_open_sort"[^>]*checked', page)
    assert re.search(r'name="order_relevance"[^>]*value="1"', page)
    assert re.search(r'name="order_label_match"[^>]*value="2"', page)
    assert re.search(r'value="name"[^>]*checked', page)
    fresh = text(researcher.client.get(f"/r/studies/{study_id}/rounds/new?fresh=1"))
    assert "repeats the design" not in fresh and "Rate and sort, round one." not in fresh


def test_plan_as_json_for_the_round_page(researcher, study_id, web_store):
    rid = make_round(web_store, study_id)
    r = researcher.client.get(f"/r/rounds/{rid}/plan?judges=7&format=json")
    assert r.status_code == 200 and r.json["ok"] and r.json["judges"] == 7
    assert r.json["messages"] and "With 7 judges" in r.json["messages"][0]
    bad = researcher.client.get(f"/r/rounds/{rid}/plan?judges=lots&format=json")
    assert bad.status_code == 400 and bad.json["ok"] is False and bad.json["error"]
