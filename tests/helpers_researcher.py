"""Fixtures and builders for the researcher-side web tests (invented orchard-volunteer scenario)."""

from __future__ import annotations

import csv
import io
import json
import re
import shutil

import pytest

PASSWORD = "correct horse battery"

FACTORS = [("F1", "Harvest joy", "Enjoyment of picking and sharing the fruit of the orchard."),
           ("F2", "Tree care", "Interest in pruning, grafting and keeping the trees healthy."),
           ("F3", "Neighbourhood ties", "Meeting neighbours and building friendships through the orchard.")]

ITEMS = [
    ("q1", "I look forward to picking apples in autumn.", (0.72, 0.10, 0.05)),
    ("q2", "Sharing plums with neighbours makes me happy.", (0.65, 0.08, 0.31)),
    ("q3", "Pressing juice together is the best day of the year.", (0.61, 0.12, 0.20)),
    ("q4", "I like learning how to prune a young tree.", (0.05, 0.70, 0.02)),
    ("q5", "Grafting old varieties interests me.", (0.11, 0.66, 0.04)),
    ("q6", "I check the trees for disease after rain.", (0.02, 0.58, 0.15)),
    ("q7", "The orchard is where I met most of my friends.", (0.10, 0.05, 0.74)),
    ("q8", "Work days help me get to know people on my street.", (0.22, 0.03, 0.68)),
    ("q9", "I volunteer to feel part of the neighbourhood.", (0.15, 0.09, 0.41)),
]


def solution_dict(definitions: bool = True) -> dict:
    """A JSON solution document (the format of ``Solution.to_dict``)."""
    return {
        "items": [{"id": i, "text": t, "loadings": {f[0]: v for f, v in zip(FACTORS, ls)}} for i, t, ls in ITEMS],
        "factors": [{"id": f, "name": n, "definition": d if definitions else ""} for f, n, d in FACTORS],
        "meta": {"extraction": "minres", "rotation": "oblimin", "n": "212"},
        "phi": {"factors": [f[0] for f in FACTORS],
                "matrix": [[1, 0.3, 0.25], [0.3, 1, 0.2], [0.25, 0.2, 1]]},
    }


def json_bytes(definitions: bool = True) -> bytes:
    return json.dumps(solution_dict(definitions)).encode()


def csv_items_bytes() -> bytes:
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(["item", "text"] + [f[0] for f in FACTORS])
    for i, t, ls in ITEMS:
        w.writerow([i, t] + [f"{v:.2f}" for v in ls])
    return buf.getvalue().encode()


def xlsx_bytes() -> bytes:
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "items"
    ws.append(["item", "text"] + [f[0] for f in FACTORS])
    for i, t, ls in ITEMS:
        ws.append([i, t, *ls])
    fs = wb.create_sheet("factors")
    fs.append(["factor", "name", "definition"])
    for row in FACTORS:
        fs.append(list(row))
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def csrf_from(html: str) -> str:
    m = re.search(r'name="csrf_token" value="([^"]+)"', html)
    assert m, "no CSRF token on the page"
    return m.group(1)


class Researcher:
    """A logged-in researcher driving the test client with real CSRF tokens taken from the pages."""

    def __init__(self, client):
        self.client = client

    def login(self):
        page = self.client.get("/r/login").get_data(as_text=True)
        resp = self.client.post("/r/login", data={"password": PASSWORD, "csrf_token": csrf_from(page)})
        assert resp.status_code == 302, resp.get_data(as_text=True)
        return self

    def token(self, path: str = "/r/") -> str:
        return csrf_from(self.client.get(path).get_data(as_text=True))

    def post(self, path: str, data: dict | None = None, *, page: str = "/r/", **kw):
        data = dict(data or {})
        data.setdefault("csrf_token", self.token(page))
        return self.client.post(path, data=data, **kw)

    def upload(self, content: bytes, filename: str, title: str = "Orchard motives"):
        return self.post("/r/studies/new", {"title": title, "solution": (io.BytesIO(content), filename)},
                         page="/r/studies/new", content_type="multipart/form-data")


@pytest.fixture(scope="module")
def template_project(tmp_path_factory):
    """One initialised project per module (hashing the password is slow); each test gets a copy."""
    from labelstudy.project import init_project

    project, _ = init_project(tmp_path_factory.mktemp("template") / "p", password=PASSWORD)
    store = project.store()
    store.connect().execute("PRAGMA wal_checkpoint(TRUNCATE)")
    store.close()
    return project.path


@pytest.fixture
def app(template_project, tmp_path):
    from labelstudy.web import create_app

    target = tmp_path / "p"
    shutil.copytree(template_project, target)
    return create_app(target, {"TESTING": True})


@pytest.fixture
def web_store(app):
    return app.extensions["labelstudy_store"]


@pytest.fixture
def researcher(app):
    """A client already logged in (the session flag the login sets; the login form itself is tested once,
    in test_login_form_then_pages, since checking the salted hash is slow)."""
    client = app.test_client()
    with client.session_transaction() as sess:
        sess["researcher"] = True
    return Researcher(client)


@pytest.fixture
def study_id(researcher, web_store):
    resp = researcher.upload(json_bytes(), "orchard.json")
    assert resp.status_code == 302, resp.get_data(as_text=True)
    return web_store.list_studies()[-1]["id"]


def make_round(store, sid, kinds=("label_match", "relevance"), show="both") -> int:
    tasks = [(k, {"show": show} if k == "label_match" else {}) for k in kinds]
    return store.create_round(sid, tasks=tasks, instructions="Do it.", consent="Agreed.", seed=7)
