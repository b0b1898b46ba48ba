"""The results page, the downloads and the ``labelstudy report`` command."""

from __future__ import annotations

import io
import json
import re

import openpyxl
import pytest
from click.testing import CliRunner

from helpers_results import PASSWORD, build
from labelstudy.cli import main
from labelstudy.results import EXPORTS, score_round
from labelstudy.web import create_app


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    return build(tmp_path_factory.mktemp("web") / "p", rounds=2,
                 tasks=[("label_match", {}), ("relevance", {}), ("open_sort", {"max_piles": 6})])


@pytest.fixture()
def client(built):
    project = built[0]
    app = create_app(project.path, {"TESTING": True, "WTF_CSRF_ENABLED": False})
    c = app.test_client()
    r = c.post("/r/login", data={"password": PASSWORD})
    assert r.status_code == 302
    return c


def test_results_page_needs_login(built):
    app = create_app(built[0].path, {"TESTING": True})
    c = app.test_client()
    rid = built[3][0]
    assert c.get(f"/r/rounds/{rid}/results").status_code == 302
    assert c.get(f"/r/rounds/{rid}/export/results.json").status_code == 302


def test_results_page_shows_overview_numbers(client, built):
    _, store, _, rids = built
    res = score_round(store, rids[0])
    r = client.get(f"/r/rounds/{rids[0]}/results")
    assert r.status_code == 200
    html = r.get_data(as_text=True)
    assert re.search(r'id="n-invited">\s*8\s*<', html)
    assert re.search(r'id="n-submitted">\s*8\s*<', html)
    alpha = res.agreement_value("label_match", "Krippendorff")
    assert f"{alpha:.3f}" in html
    ac1 = res.agreement_value("label_match", "Gwet")
    assert f"{ac1:.3f}" in html
    assert "not proof of validity" in html and "ethics" in html
    assert 'style="' not in html and "<style" not in html and "<script" not in html   # CSP: no inline
    assert 'src="data:image/png;base64,' in html
    assert "report.css" in html
    for name in EXPORTS:
        assert f"/r/rounds/{rids[0]}/export/{name}" in html


def test_second_round_page_compares_with_the_first(client, built):
    rid = built[3][1]
    html = client.get(f"/r/rounds/{rid}/results").get_data(as_text=True)
    assert "Round 2 compared with round 1" in html


def test_downloads(client, built):
    _, store, _, rids = built
    rid = rids[0]
    res = score_round(store, rid)
    for name, ctype in EXPORTS.items():
        r = client.get(f"/r/rounds/{rid}/export/{name}")
        assert r.status_code == 200, name
        assert r.headers["Content-Type"] == ctype
        assert "attachment" in r.headers["Content-Disposition"]
    doc = client.get(f"/r/rounds/{rid}/export/results.json").get_json()
    assert doc["tables"]["agreement"][0]["value"] == pytest.approx(res.tables["agreement"]["value"].iloc[0])
    wb = openpyxl.load_workbook(io.BytesIO(client.get(f"/r/rounds/{rid}/export/results.xlsx").data))
    assert "Items" in wb.sheetnames
    rep = client.get(f"/r/rounds/{rid}/export/report.html")
    assert "style-src 'unsafe-inline'" in rep.headers["Content-Security-Policy"]
    assert client.get(f"/r/rounds/{rid}/export/secrets.txt").status_code == 404
    assert client.get("/r/rounds/9999/results").status_code == 404


def test_bad_rules_file_shows_a_clear_message(client, built):
    project, _, _, rids = built
    path = project.path / "rules.json"
    keep = path.read_text()
    try:
        path.write_text(json.dumps({"rules": {"hit_min": {"value": 1}}}))
        r = client.get(f"/r/rounds/{rids[0]}/results")
        assert r.status_code == 400
        assert "unknown rule &#39;hit_min&#39;" in r.get_data(as_text=True)
    finally:
        path.write_text(keep)


def test_cli_report_writes_six_files(built, tmp_path):
    project, _, _, rids = built
    out = tmp_path / "out"
    result = CliRunner().invoke(main, ["report", str(project.path), "--round", "1", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in out.iterdir()) == sorted(EXPORTS)
    assert "[1/7] scoring round 1" in result.output and "[7/7] writing methods.md ... done" in result.output
    doc = json.loads((out / "results.json").read_text())
    assert doc["meta"]["round_number"] == 1
    # default round: the latest with answers
    result = CliRunner().invoke(main, ["report", str(project.path), "--out", str(tmp_path / "o2")])
    assert result.exit_code == 0, result.output
    assert json.loads((tmp_path / "o2" / "results.json").read_text())["meta"]["round_number"] == 2


@pytest.mark.parametrize("args, words", [
    (["--round", "7"], "has no round 7"),
    (["--study", "5"], "there is no study 5"),
])
def test_cli_report_domain_errors_are_one_line(built, tmp_path, args, words):
    result = CliRunner().invoke(main, ["report", str(built[0].path), *args, "--out", str(tmp_path / "o")])
    assert result.exit_code == 1
    assert words in result.output
    assert "Traceback" not in result.output


def test_cli_report_on_a_folder_that_is_not_a_project(tmp_path):
    result = CliRunner().invoke(main, ["report", str(tmp_path / "nope"), "--out", str(tmp_path / "o")])
    assert result.exit_code == 1
    assert "is not a project folder" in result.output
