"""The judge web form through Flask's test client: every route, with and without JavaScript paths."""

from __future__ import annotations

import re

import pytest

from labelstudy import tasks as T
from tests.helpers_judge import ALL_KINDS, build_round, csrf_from, make_app


@pytest.fixture
def built(tmp_path):
    b = build_round(tmp_path, tasks=ALL_KINDS)
    yield b
    b.store.close()


@pytest.fixture
def client(built):
    return make_app(built.path).test_client()


def consent(client, token):
    page = client.get(f"/j/{token}").get_data(as_text=True)
    r = client.post(f"/j/{token}/consent", data={"csrf_token": csrf_from(page)})
    assert r.status_code == 302
    return csrf_from(page)


def views(b):
    rnd = b.store.get_round(b.round_id)
    sol = b.store.round_solution(b.round_id)
    return [T.build_view(t, sol, seed=rnd["seed"], judge_id=b.judge_id) for t in b.store.tasks(b.round_id)]


def some_answer(unit, k=0):
    """A valid answer for a unit: the k-th choice, or a text."""
    if unit.choices:
        return unit.choices[k % len(unit.choices)][0]
    return f"Name {unit.key}"


def stored(b):
    return {(a["task_id"], a["item"]): a for a in b.store.judge_answers(b.judge_id, b.round_id)}


def save(client, token, csrf, **body):
    return client.post(f"/j/{token}/save", json=body, headers={"X-CSRF-Token": csrf})


# ------------------------------------------------------------------------------------------ welcome, consent
def test_welcome_shows_title_instructions_consent_and_hides_tasks(client, built):
    r = client.get(f"/j/{built.token}")
    html = r.get_data(as_text=True)
    assert r.status_code == 200
    assert "Why we volunteer at the orchard" in html
    assert "There are no wrong answers." in html
    assert "kept with a code, not your name" in html
    assert "I agree, start" in html
    assert "I enjoy the chats" not in html            # no statements before consent
    r = client.get(f"/j/{built.token}/task/1")
    assert r.status_code == 302 and r.location.endswith(f"/j/{built.token}")
    r = client.get(f"/j/{built.token}/review")
    assert r.status_code == 302


def test_consent_needs_the_link_token_and_is_recorded(client, built):
    r = client.post(f"/j/{built.token}/consent", data={})
    assert r.status_code == 400
    assert "security check" in r.get_data(as_text=True)
    assert built.store.invitation_for(built.judge_id, built.round_id)["consented_at"] is None
    csrf = consent(client, built.token)
    assert built.store.invitation_for(built.judge_id, built.round_id)["consented_at"]
    # the token is bound to the link: another link's token is refused
    other = built.store.add_judge(built.round_id, "Judge Z")
    r = client.post(f"/j/{other['token']}/consent", data={"csrf_token": csrf})
    assert r.status_code == 400
    # after consent the welcome page offers to continue
    assert "Continue where you left off" in client.get(f"/j/{built.token}").get_data(as_text=True)


# ------------------------------------------------------------------------------------------ every task kind
@pytest.mark.parametrize("n", range(1, len(ALL_KINDS) + 1))
def test_each_task_kind_renders_and_accepts_a_plain_post(client, built, n):
    csrf = consent(client, built.token)
    view = views(built)[n - 1]
    r = client.get(f"/j/{built.token}/task/{n}")
    html = r.get_data(as_text=True)
    assert r.status_code == 200
    assert f"Task {n} of {len(ALL_KINDS)}" in html
    assert "Save and continue" in html
    assert "Add a comment" in html
    for unit in view.units:                      # every unit has its control and a revision field
        assert f'name="v__{unit.key}"' in html
        assert f'name="rev__{unit.key}"' in html
    assert '<script src="/static/judge.js"' in html
    assert not re.search(r"<script(?![^>]*\bsrc=)", html)   # CSP: no inline script
    assert " style=" not in html and "<style" not in html
    if view.kind == "label_match":
        assert T.NONE_LABEL in html
        assert "Gaining practical skills" in html       # show=both: definitions shown too
    if view.kind in ("relevance", "definition_fit", "label_match"):
        assert "<fieldset" in html and "<legend" in html

    data = {"csrf_token": csrf, "go": "next"}
    for k, unit in enumerate(view.units):
        data[f"v__{unit.key}"] = some_answer(unit, k)
        data[f"rev__{unit.key}"] = "0"
    first = view.units[0]
    data[f"c__{first.key}"] = "hard to place"
    r = client.post(f"/j/{built.token}/task/{n}", data=data)
    assert r.status_code == 302
    nxt = f"/j/{built.token}/task/{n + 1}" if n < len(ALL_KINDS) else f"/j/{built.token}/review"
    assert r.location.endswith(nxt)
    got = stored(built)
    for k, unit in enumerate(view.units):
        row = got[(view.task_id, unit.key)]
        assert row["value"] == some_answer(unit, k)
        assert row["revision"] == 1
    assert got[(view.task_id, first.key)]["comment"] == "hard to place"
    # the page now shows the answers and their saved state; a second identical post changes nothing
    html = client.get(f"/j/{built.token}/task/{n}").get_data(as_text=True)
    assert "Saved" in html
    data.update({f"rev__{u.key}": "1" for u in view.units})
    assert client.post(f"/j/{built.token}/task/{n}", data=data).status_code == 302
    assert all(r["revision"] == 1 for r in stored(built).values())


def test_plain_post_back_button_and_unchanged_fields_are_not_written(client, built):
    csrf = consent(client, built.token)
    view = views(built)[1]
    unit = view.units[0]
    r = client.post(f"/j/{built.token}/task/2", data={"csrf_token": csrf, "go": "back",
                                                      f"v__{unit.key}": unit.choices[0][0]})
    assert r.location.endswith(f"/j/{built.token}/task/1")
    assert len(stored(built)) == 1                 # the other, empty questions wrote no rows


def test_plain_post_reports_stale_answers_without_overwriting(client, built):
    csrf = consent(client, built.token)
    view = views(built)[1]
    unit = view.units[0]
    # another device saves first
    assert save(client, built.token, csrf, task_id=view.task_id, item=unit.key, value=unit.choices[0][0],
                revision=1).status_code == 200
    # the page opened before that still says revision 0
    r = client.post(f"/j/{built.token}/task/2", data={"csrf_token": csrf, f"v__{unit.key}": unit.choices[1][0],
                                                      f"rev__{unit.key}": "0"})
    assert r.status_code == 302 and "stale=1" in r.location
    assert stored(built)[(view.task_id, unit.key)]["value"] == unit.choices[0][0]
    page = client.get(r.location).get_data(as_text=True)
    assert "changed on" in page and "another device" in page


def test_csrf_refusal_returns_the_page_with_answers_filled_in(client, built):
    consent(client, built.token)
    vs = views(built)
    sort, match = vs[0], vs[1]
    item, pile = sort.units[0], next(u for u in sort.units if u.facet == "pile")
    r = client.post(f"/j/{built.token}/task/1", data={"csrf_token": "0" * 64, f"v__{item.key}": "3",
                                                      f"v__{pile.key}": "Friends & <chats>"})
    html = r.get_data(as_text=True)
    assert r.status_code == 400
    assert "security check" in html
    assert re.search(r'<option value="3" selected>', html)
    assert 'value="Friends &amp; &lt;chats&gt;"' in html
    assert stored(built) == {}
    unit = match.units[2]
    code = unit.choices[1][0]
    r = client.post(f"/j/{built.token}/task/2", data={f"v__{unit.key}": code, f"c__{unit.key}": "unsure"})
    html = r.get_data(as_text=True)
    assert r.status_code == 400
    assert re.search(rf'name="v__{re.escape(unit.key)}" value="{re.escape(code)}" checked', html)
    assert ">unsure</textarea>" in html
    assert stored(built) == {}


def test_plain_post_with_a_bad_value_saves_the_rest_and_marks_the_field(client, built):
    csrf = consent(client, built.token)
    view = views(built)[2]
    a, b_ = view.units[0], view.units[1]
    r = client.post(f"/j/{built.token}/task/3", data={"csrf_token": csrf, f"v__{a.key}": "4",
                                                      f"v__{b_.key}": "9"})
    html = r.get_data(as_text=True)
    assert r.status_code == 400
    assert "is not one of the choices" in html
    got = stored(built)
    assert got[(view.task_id, a.key)]["value"] == "4"
    assert (view.task_id, b_.key) not in got


def test_bad_task_number_is_not_found(client, built):
    consent(client, built.token)
    assert client.get(f"/j/{built.token}/task/99").status_code == 404
    assert client.get(f"/j/{built.token}/task/0").status_code == 404


# ------------------------------------------------------------------------------------------ JSON save
def test_json_save_saved_unchanged_stale_conflict(client, built):
    csrf = consent(client, built.token)
    view = views(built)[1]
    unit = view.units[0]
    a, b_ = unit.choices[0][0], unit.choices[1][0]
    r = save(client, built.token, csrf, task_id=view.task_id, item=unit.key, value=a, comment="", revision=1,
             seconds=4.5)
    assert r.status_code == 200
    assert r.json["ok"] is True and r.json["status"] == "saved" and r.json["revision"] == 1
    assert r.json["value"] == a and r.json["saved_at"]
    assert r.json["progress"] == {"answered": 1, "required": sum(len(v.required_keys) for v in views(built))}
    assert built.store.answers(built.round_id)["seconds"].tolist() == [4.5]
    r = save(client, built.token, csrf, task_id=view.task_id, item=unit.key, value=a, comment="", revision=1)
    assert r.status_code == 200 and r.json["status"] == "unchanged"
    r = save(client, built.token, csrf, task_id=view.task_id, item=unit.key, value=b_, comment="", revision=2)
    assert r.status_code == 200 and r.json["status"] == "saved" and r.json["revision"] == 2
    r = save(client, built.token, csrf, task_id=view.task_id, item=unit.key, value=a, comment="", revision=1)
    assert r.status_code == 409
    assert r.json["status"] == "stale" and r.json["value"] == b_ and r.json["revision"] == 2
    assert "changed on another device" in r.json["error"] and "nothing was overwritten" in r.json["error"]
    r = save(client, built.token, csrf, task_id=view.task_id, item=unit.key, value=a, comment="", revision=2)
    assert r.status_code == 409
    assert r.json["status"] == "conflict" and r.json["value"] == b_
    assert stored(built)[(view.task_id, unit.key)]["value"] == b_


def test_json_save_keeps_the_comment_when_none_is_sent(client, built):
    csrf = consent(client, built.token)
    view = views(built)[2]
    unit = view.units[0]
    save(client, built.token, csrf, task_id=view.task_id, item=unit.key, value="3", comment="borderline",
         revision=1)
    r = save(client, built.token, csrf, task_id=view.task_id, item=unit.key, value="4", revision=2)
    assert r.status_code == 200 and r.json["comment"] == "borderline"


def test_json_save_accepts_a_form_body(client, built):
    csrf = consent(client, built.token)
    view = views(built)[2]
    unit = view.units[0]
    r = client.post(f"/j/{built.token}/save", data={"csrf_token": csrf, "task_id": str(view.task_id),
                                                     "item": unit.key, "value": "2", "revision": "1"})
    assert r.status_code == 200 and r.json["status"] == "saved"


@pytest.mark.parametrize("change, needle", [
    ({"item": "no-such-item"}, "is not a question of this task"),
    ({"value": "7"}, "is not one of the choices"),
    ({"value": ["1"]}, "must be text"),
    ({"revision": "2"}, "revision must be a whole number"),
    ({"revision": 1.5}, "revision must be a whole number"),
    ({"revision": True}, "revision must be a whole number"),
    ({"revision": 0}, "revision must be a whole number"),
    ({"revision": 2**70}, "revision must be a whole number"),
    ({"task_id": 2**70}, "task_id must be a whole number"),
    ({"task_id": "x"}, "task_id must be a whole number"),
    ({"task_id": 99999}, "is not part of this round"),
    ({"seconds": "soon"}, "seconds must be a number"),
    ({"seconds": -3}, "seconds must be a number"),
    ({"comment": 5}, "the comment must be text"),
    ({"comment": "x" * 2001}, "too long"),
    ({"item": None}, "item must be"),
])
def test_json_save_bad_bodies_are_400_with_a_message(client, built, change, needle):
    csrf = consent(client, built.token)
    view = views(built)[2]
    body = {"task_id": view.task_id, "item": view.units[0].key, "value": "3", "comment": "", "revision": 1}
    body.update(change)
    r = save(client, built.token, csrf, **body)
    assert r.status_code == 400
    assert r.json["ok"] is False and needle in r.json["error"]
    assert stored(built) == {}


def test_json_save_missing_fields_and_malformed_json(client, built):
    csrf = consent(client, built.token)
    view = views(built)[2]
    r = save(client, built.token, csrf, task_id=view.task_id, item=view.units[0].key)
    assert r.status_code == 400 and "missing fields: value, revision" in r.json["error"]
    headers = {"X-CSRF-Token": csrf, "Content-Type": "application/json"}
    r = client.post(f"/j/{built.token}/save", data="{not json", headers=headers)
    assert r.status_code == 400 and "not valid JSON" in r.json["error"]
    r = client.post(f"/j/{built.token}/save", data="[1, 2]", headers=headers)
    assert r.status_code == 400 and "JSON object" in r.json["error"]


def test_json_save_refuses_a_task_of_another_round(client, built):
    csrf = consent(client, built.token)
    rid2 = built.store.create_round(built.study_id, tasks=[("relevance", {})])
    other_task = built.store.tasks(rid2)[0]["id"]
    r = save(client, built.token, csrf, task_id=other_task, item="B1", value="3", revision=1)
    assert r.status_code == 400 and "not part of this round" in r.json["error"]


def test_json_save_needs_the_link_token(client, built):
    consent(client, built.token)
    view = views(built)[2]
    body = {"task_id": view.task_id, "item": view.units[0].key, "value": "3", "revision": 1}
    r = client.post(f"/j/{built.token}/save", json=body)
    assert r.status_code == 400 and "security check" in r.json["error"]
    r = save(client, built.token, "ab" * 32, **body)
    assert r.status_code == 400
    assert stored(built) == {}


def test_judge_id_in_the_body_is_ignored(client, built):
    csrf = consent(client, built.token)
    other = built.store.add_judge(built.round_id, "Judge Z")
    view = views(built)[2]
    r = save(client, built.token, csrf, task_id=view.task_id, item=view.units[0].key, value="3", revision=1,
             judge_id=other["judge_id"])
    assert r.status_code == 200
    assert built.store.judge_answers(other["judge_id"], built.round_id) == []
    assert len(built.store.judge_answers(built.judge_id, built.round_id)) == 1


def test_json_save_before_consent_is_refused(client, built):
    page = client.get(f"/j/{built.token}").get_data(as_text=True)
    view = views(built)[2]
    r = save(client, built.token, csrf_from(page), task_id=view.task_id, item=view.units[0].key, value="3",
             revision=1)
    assert r.status_code == 403 and "consent" in r.json["error"]


def test_state_lists_every_answer(client, built):
    csrf = consent(client, built.token)
    view = views(built)[2]
    save(client, built.token, csrf, task_id=view.task_id, item=view.units[0].key, value="3", comment="ok",
         revision=2)
    r = client.get(f"/j/{built.token}/state")
    assert r.status_code == 200
    assert r.json["ok"] and not r.json["submitted"]
    [a] = r.json["answers"]
    assert (a["task_id"], a["item"], a["value"], a["comment"], a["revision"]) == (
        view.task_id, view.units[0].key, "3", "ok", 2)
    assert r.json["progress"]["answered"] == 1


# ------------------------------------------------------------------------------------------ link states
def test_revoked_link_has_its_own_page(client, built):
    csrf = consent(client, built.token)
    built.store.revoke(built.judge_id, built.round_id)
    r = client.get(f"/j/{built.token}")
    assert r.status_code == 403 and "withdrawn" in r.get_data(as_text=True)
    assert client.get(f"/j/{built.token}/task/1").status_code == 403
    view = views(built)[2]
    r = save(client, built.token, csrf, task_id=view.task_id, item=view.units[0].key, value="3", revision=1)
    assert r.status_code == 403 and "withdrawn" in r.json["error"]
    assert client.get(f"/j/{built.token}/state").status_code == 403


def test_closed_round_looks_exactly_like_an_unknown_link(client, built):
    consent(client, built.token)
    built.store.close_round(built.round_id)
    unknown = "x" * len(built.token)
    for suffix in ("", "/task/1", "/review", "/thanks"):
        a, b_ = client.get(f"/j/{built.token}{suffix}"), client.get(f"/j/{unknown}{suffix}")
        assert a.status_code == b_.status_code == 404
        assert a.get_data() == b_.get_data()
        assert "Why we volunteer" not in a.get_data(as_text=True)
    a = client.post(f"/j/{built.token}/save", json={})
    b_ = client.post(f"/j/{unknown}/save", json={})
    assert a.status_code == b_.status_code == 404 and a.get_data() == b_.get_data()
    a, b_ = client.get(f"/j/{built.token}/state"), client.get(f"/j/{unknown}/state")
    assert a.status_code == b_.status_code == 404 and a.get_data() == b_.get_data()


def test_draft_round_link_is_not_active(tmp_path):
    b = build_round(tmp_path, open_round=False)
    r = make_app(b.path).test_client().get(f"/j/{b.token}")
    assert r.status_code == 404 and "not active" in r.get_data(as_text=True)


def test_submit_locks_the_answers(client, built):
    csrf = consent(client, built.token)
    view = views(built)[2]
    save(client, built.token, csrf, task_id=view.task_id, item=view.units[0].key, value="3", revision=1)
    r = client.post(f"/j/{built.token}/submit", data={})
    assert r.status_code == 400 and "Not submitted" in r.get_data(as_text=True)
    assert not built.store.invitation_for(built.judge_id, built.round_id)["submitted_at"]
    r = client.post(f"/j/{built.token}/submit", data={"csrf_token": csrf})
    assert r.status_code == 302 and r.location.endswith(f"/j/{built.token}/thanks")
    assert built.store.invitation_for(built.judge_id, built.round_id)["submitted_at"]
    thanks = client.get(f"/j/{built.token}/thanks").get_data(as_text=True)
    assert "Your answers were submitted" in thanks
    assert client.get(f"/j/{built.token}").location.endswith("/review")
    html = client.get(f"/j/{built.token}/review").get_data(as_text=True)
    assert "Your answers were submitted" in html and "Submit my answers" not in html
    page = client.get(f"/j/{built.token}/task/3").get_data(as_text=True)
    assert "Your answers were submitted" in page and "disabled" in page and "Save and continue" not in page
    r = client.post(f"/j/{built.token}/task/3", data={"csrf_token": csrf, f"v__{view.units[1].key}": "2"})
    assert r.status_code == 403
    r = save(client, built.token, csrf, task_id=view.task_id, item=view.units[1].key, value="2", revision=1)
    assert r.status_code == 403 and "submitted" in r.json["error"]
    assert client.get(f"/j/{built.token}/state").json["submitted"] is True
    assert len(stored(built)) == 1


def test_review_lists_missing_answers_with_links_and_progress_counts(client, built):
    csrf = consent(client, built.token)
    vs = views(built)
    total = sum(len(v.required_keys) for v in vs)
    rel = vs[2]
    for k, unit in enumerate(rel.units[:4]):
        save(client, built.token, csrf, task_id=rel.task_id, item=unit.key, value="4", revision=1)
    html = client.get(f"/j/{built.token}/review").get_data(as_text=True)
    assert f"{total - 4} questions are not answered yet" in html
    assert re.search(r'<span id="progress-count">4</span> of\s+<span id="progress-total">%d</span>' % total, html)
    assert f"{len(rel.required_keys) - 4} of {len(rel.required_keys)} answered" not in html
    assert f"4 of {len(rel.required_keys)} answered" in html
    texts = {it.id: it.text for it in built.store.round_solution(built.round_id).items}
    missing = rel.units[4]
    assert f'href="/j/{built.token}/task/3#u4">{texts[missing.item_id]}</a>' in html
    answered = rel.units[0]
    assert f'href="/j/{built.token}/task/3#u0">' not in html
    assert "Highly relevant" in html                            # the answers are listed by label
    page = client.get(f"/j/{built.token}/task/1").get_data(as_text=True)
    assert re.search(r'<span id="progress-count">4</span> of\s+<span id="progress-total">%d</span>' % total, page)
    assert answered.key


def test_welcome_resumes_at_the_first_unfinished_task(client, built):
    csrf = consent(client, built.token)
    view = views(built)[0]
    data = {"csrf_token": csrf}
    data.update({f"v__{u.key}": some_answer(u) for u in view.units if u.facet != "pile"})
    client.post(f"/j/{built.token}/task/1", data=data)
    html = client.get(f"/j/{built.token}").get_data(as_text=True)
    assert f'href="/j/{built.token}/task/2"' in html and "Continue where you left off" in html


def test_deadline_passed_is_shown_but_answers_are_still_accepted(tmp_path):
    b = build_round(tmp_path, deadline="2020-01-31")
    c = make_app(b.path).test_client()
    csrf = consent(c, b.token)
    html = c.get(f"/j/{b.token}/task/3").get_data(as_text=True)
    assert "deadline (2020-01-31) has passed" in html and "still" in html
    view = views(b)[2]
    r = save(c, b.token, csrf, task_id=view.task_id, item=view.units[0].key, value="3", revision=1)
    assert r.status_code == 200


def test_judge_csrf_token_is_the_link_bound_hmac(client, built):
    import hashlib
    import hmac

    key = built.project.secret_key()
    expected = hmac.new(key, ("judge-form:" + built.token).encode(), hashlib.sha256).hexdigest()
    assert csrf_from(client.get(f"/j/{built.token}").get_data(as_text=True)) == expected


def test_plain_post_with_garbage_revision_fields_does_not_fail(client, built):
    csrf = consent(client, built.token)
    view = views(built)[2]
    a, b_ = view.units[0], view.units[1]
    r = client.post(f"/j/{built.token}/task/3", data={"csrf_token": csrf, f"v__{a.key}": "4", f"rev__{a.key}": "x",
                                                      f"v__{b_.key}": "3", f"rev__{b_.key}": "9" * 40})
    assert r.status_code == 302
    got = stored(built)
    assert got[(view.task_id, a.key)]["revision"] == 1
    assert got[(view.task_id, b_.key)]["value"] == "3"
