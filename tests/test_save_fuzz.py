"""Fuzzing the judge's save endpoint: whatever arrives, only our own clear answers come back.

Random JSON and form bodies, content types, headers, huge and odd values (unicode, lone surrogates, NaN,
integers beyond 64 bits, nested objects, wrong types) go through the Flask test client. Allowed outcomes:
200 for a valid save, 409 for a stale one (with the stored answer), and 4xx with a JSON ``error`` message
for everything else; never a 500 and never a traceback in the body.
"""

from __future__ import annotations

import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from helpers_reliability import build_project, form_csrf
from labelstudy.web import create_app

ALLOWED = {200, 400, 403, 404, 405, 409, 413, 415}


@pytest.fixture(scope="module")
def env(tmp_path_factory):
    b = build_project(tmp_path_factory.mktemp("fuzz") / "p", n_judges=2, n_items=8)
    app = create_app(b.path, {"TESTING": True, "MAX_CONTENT_LENGTH": 256 * 1024})
    yield b, app
    b.store.close()


scalars = st.one_of(
    st.none(), st.booleans(),
    st.integers(min_value=-(2**70), max_value=2**70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=60),
    st.text(alphabet=st.characters(blacklist_categories=()), max_size=30),  # includes lone surrogates
    st.sampled_from(["F1", "F2", "none", "Q001", "", " ", "1", "0", "-1", "1e309", "NaN", "\x00", "\u202e",
                     "x" * 5000, "<script>alert(1)</script>"]),
)
json_values = st.recursive(scalars, lambda inner: st.one_of(st.lists(inner, max_size=4),
                                                             st.dictionaries(st.text(max_size=8), inner, max_size=4)),
                           max_leaves=12)
field_names = st.sampled_from(["task_id", "item", "value", "comment", "revision", "seconds", "csrf_token",
                               "judge_id", "round_id", "__proto__", ""])


@st.composite
def save_bodies(draw, task_id):
    """Mostly well-formed-looking save bodies with some fields broken, plus pure noise."""
    if draw(st.integers(0, 9)) == 0:
        return draw(json_values)
    body = {"task_id": task_id, "item": draw(st.sampled_from(["Q001", "Q002", "Q003"])),
            "value": draw(st.sampled_from(["F1", "F2", "F3", "F4", "none"])), "comment": "",
            "revision": draw(st.integers(1, 5))}
    if draw(st.integers(0, 4)) == 0:
        body["comment"] = draw(st.text(alphabet=st.characters(blacklist_categories=()), max_size=40))
    for _ in range(draw(st.integers(0, 3))):
        body[draw(field_names)] = draw(json_values)
    for name in draw(st.lists(st.sampled_from(list(body)), max_size=2)):
        body.pop(name, None)
    return body


def _encode(draw, body):
    kind = draw(st.sampled_from(["json", "json", "json", "form", "raw", "wrong-type"]))
    if kind == "json":
        return json.dumps(body, allow_nan=True).encode("utf-8", "surrogatepass"), "application/json"
    if kind == "form":
        data = body if isinstance(body, dict) else {"value": body}
        pairs = "&".join(f"{k}={json.dumps(v) if not isinstance(v, str) else v}" for k, v in data.items())
        return pairs.encode("utf-8", "surrogatepass"), "application/x-www-form-urlencoded"
    if kind == "raw":
        return draw(st.binary(max_size=300)), draw(st.sampled_from(["application/json", "text/plain", "",
                                                                      "multipart/form-data; boundary=x",
                                                                      "application/json; charset=latin-1"]))
    return json.dumps(body, allow_nan=True).encode("utf-8", "surrogatepass"), draw(
        st.sampled_from(["text/plain", "application/xml", "application/x-www-form-urlencoded"]))


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                                   HealthCheck.too_slow])
@given(data=st.data())
def test_save_endpoint_answers_only_with_our_own_clear_messages(env, data):
    built, app = env
    token = built.tokens[0]
    body = data.draw(save_bodies(built.task_id))
    raw, ctype = _encode(data.draw, body)
    headers = {}
    csrf_choice = data.draw(st.sampled_from(["valid", "valid", "valid", "none", "other", "junk"]))
    if csrf_choice == "valid":
        headers["X-CSRF-Token"] = form_csrf(built.project, token)
    elif csrf_choice == "other":
        headers["X-CSRF-Token"] = form_csrf(built.project, built.tokens[1])
    elif csrf_choice == "junk":
        headers["X-CSRF-Token"] = data.draw(st.text(alphabet=st.characters(min_codepoint=32, max_codepoint=126),
                                                    max_size=80))
    headers["Accept"] = data.draw(st.sampled_from(["application/json", "*/*", "text/html", ""]))
    if ctype:
        headers["Content-Type"] = ctype
    resp = app.test_client().post(f"/j/{token}/save", data=raw, headers=headers)
    text = resp.get_data(as_text=True)
    assert resp.status_code in ALLOWED, (resp.status_code, body, ctype, text[:300])
    assert "Traceback" not in text and "File \"" not in text
    payload = resp.get_json(silent=True)
    assert isinstance(payload, dict), f"not JSON: {text[:200]}"
    if resp.status_code == 200:
        assert payload["ok"] is True and payload["status"] in ("saved", "unchanged")
    elif resp.status_code == 409:
        assert payload["status"] in ("stale", "conflict") and "revision" in payload
    else:
        assert isinstance(payload.get("error"), str) and len(payload["error"]) > 5


NASTY = [
    {"item": "Q001", "value": "F1", "revision": 2**70},
    {"item": "Q001", "value": "F1", "revision": 1, "task_id": 2**70},
    {"item": "Q001", "value": "F1", "revision": 1, "seconds": 1e308},
    {"item": "Q002", "value": "F1", "revision": 1, "comment": "\ud800"},      # lone surrogate
    {"item": "Q00\ud800", "value": "F1", "revision": 1},
    {"item": "Q003", "value": "F1\u0000", "revision": 1},
    {"item": "Q003", "value": {"$gt": ""}, "revision": 1},
    {"item": ["Q003"], "value": "F1", "revision": 1},
    {"item": "Q003", "value": "F1", "revision": "1"},
    {"item": "Q003", "value": "F1", "revision": 1.0},
    {"item": "Q003", "value": "F1", "revision": True},
    {"item": "Q003", "value": "F1", "revision": 1, "comment": "c" * 100_000},
]


@pytest.mark.parametrize("body", NASTY, ids=range(len(NASTY)))
def test_known_nasty_bodies_get_a_clear_answer(env, body):
    built, app = env
    token = built.tokens[1]
    full = {"task_id": built.task_id, "comment": "", **body}
    raw = json.dumps(full).encode()      # ASCII with escapes, as a browser would send it
    resp = app.test_client().post(f"/j/{token}/save", data=raw, headers={
        "Content-Type": "application/json", "X-CSRF-Token": form_csrf(built.project, token)})
    assert resp.status_code in ALLOWED - {409}, resp.get_data(as_text=True)[:300]
    payload = resp.get_json()
    if resp.status_code != 200:
        assert isinstance(payload.get("error"), str)


def test_fuzzed_saves_left_only_valid_answers(env):
    """Whatever the fuzzer sent, every stored answer is a valid choice with a whole revision >= 1."""
    built, _ = env
    for a in built.store.judge_answers(built.judge_ids[0], built.round_id):
        assert a["value"] in (None, "F1", "F2", "F3", "F4", "none")
        assert isinstance(a["revision"], int) and a["revision"] >= 1
        assert a["item"] in built.item_ids
