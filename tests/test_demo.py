"""`labelstudy demo`: the seeded demonstration project (labelstudy.demo, labelstudy.cli.demo)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from labelstudy.cli import main
from labelstudy.demo import DEMO_MARKER, sample_solution_path
from labelstudy.project import init_project
from labelstudy.solution import load_solution
from labelstudy.store import Store

ROOT = Path(__file__).resolve().parent.parent
LINK = re.compile(r"http://127\.0\.0\.1:8150/j/([A-Za-z0-9_-]{20,})")


def run_demo(target: Path, *extra: str):
    return CliRunner().invoke(main, ["demo", "--dir", str(target), "--no-serve", *extra],
                              catch_exceptions=False)


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    target = tmp_path_factory.mktemp("demo") / "proj"
    result = run_demo(target)
    assert result.exit_code == 0, result.output
    return target, result.output


def test_output_has_researcher_url_password_and_links(demo_dir):
    target, out = demo_dir
    assert "http://127.0.0.1:8150/r/" in out
    password = re.search(r"Researcher password: (\S+)", out)
    assert password and len(password.group(1)) >= 12
    links = LINK.findall(out)
    assert len(links) == 12 and len(set(links)) == 12
    lines = [ln for ln in out.splitlines() if LINK.search(ln)]
    # the two judges still to answer are listed first and marked
    assert all("STILL TO ANSWER" in ln and "not started" in ln for ln in lines[:2])
    assert not any("STILL TO ANSWER" in ln for ln in lines[2:])
    assert all("submitted" in ln for ln in lines[2:])
    # the printed password is the researcher's password
    from labelstudy.project import open_project
    assert open_project(target).check_password(password.group(1))


def test_database_has_round_one_open_with_ten_submitted_and_two_untouched(demo_dir):
    target, _ = demo_dir
    store = Store(target / "labelstudy.sqlite", create=False)
    assert (target / DEMO_MARKER).is_file()
    (study,) = store.list_studies()
    assert study["n_items"] == 20 and study["n_factors"] == 4
    (rnd,) = store.list_rounds(study["id"])
    assert rnd["number"] == 1 and rnd["status"] == "open"
    assert [t["kind"] for t in store.tasks(rnd["id"])] == ["open_sort", "label_match", "relevance",
                                                           "essentiality", "definition_fit", "naming"]
    naming = store.tasks(rnd["id"])[-1]["config"]
    assert all(len(v) >= 2 for v in naming["candidates"].values())
    assert store.tasks(rnd["id"])[1]["config"]["show"] == "both"
    assert rnd["instructions"] and rnd["consent"]
    invs = store.invitations(rnd["id"])
    assert len(invs) == 12
    untouched = [i for i in invs if i["n_answered"] == 0]
    submitted = [i for i in invs if i["submitted_at"]]
    assert len(untouched) == 2 and len(submitted) == 10
    assert not {i["judge_id"] for i in untouched} & {i["judge_id"] for i in submitted}
    answers = store.answers(rnd["id"])
    assert set(answers["revision"]) == {1}
    assert answers["seconds"].notna().all()
    # every answering judge answered every task kind
    assert answers.groupby("judge_id")["task_kind"].nunique().eq(6).all()
    assert answers["judge_id"].nunique() == 10


def test_rerunning_recreates_from_scratch(tmp_path):
    target = tmp_path / "again"
    first = run_demo(target)
    assert first.exit_code == 0, first.output
    (target / "stray-file.txt").write_text("left over")
    second = run_demo(target)
    assert second.exit_code == 0, second.output
    assert "Rebuilt" in second.output
    assert not (target / "stray-file.txt").exists()
    assert set(LINK.findall(first.output)).isdisjoint(LINK.findall(second.output))
    store = Store(target / "labelstudy.sqlite", create=False)
    assert len(store.list_studies()) == 1
    assert len(store.invitations(store.list_rounds()[0]["id"])) == 12


def test_a_real_project_is_refused_and_left_alone(tmp_path):
    target = tmp_path / "real"
    init_project(target, password="correct horse battery")
    before = sorted(p.name for p in target.iterdir())
    result = run_demo(target)
    assert result.exit_code != 0
    assert "did not create" in result.output and "Nothing was changed" in result.output
    assert "Traceback" not in result.output
    assert sorted(p.name for p in target.iterdir()) == before
    assert Store(target / "labelstudy.sqlite", create=False).list_studies() == []


def test_a_non_empty_folder_is_refused(tmp_path):
    target = tmp_path / "other"
    target.mkdir()
    (target / "notes.txt").write_text("mine")
    result = run_demo(target)
    assert result.exit_code != 0 and "not empty" in result.output
    assert (target / "notes.txt").read_text() == "mine"


def test_host_and_port_shape_the_links(tmp_path):
    result = CliRunner().invoke(main, ["demo", "--dir", str(tmp_path / "p"), "--no-serve", "--port", "9001",
                                       "--host", "localhost"])
    assert result.exit_code == 0, result.output
    assert "http://localhost:9001/r/" in result.output
    assert len(re.findall(r"http://localhost:9001/j/\S+", result.output)) == 12


def test_packaged_solution_copy_matches_the_sample(tmp_path):
    sample = load_solution(ROOT / "sample_studies" / "community_orchards" / "solution" / "orchard_solution.xlsx")
    packaged = load_solution(ROOT / "labelstudy" / "defaults" / "orchard_solution.xlsx")
    strip = lambda s: {k: v for k, v in s.to_dict().items() if k != "source"}  # noqa: E731
    assert strip(sample) == strip(packaged)
    assert sample_solution_path().is_file()


def test_printed_links_open_the_judge_welcome_page(demo_dir):
    target, out = demo_dir
    try:
        from labelstudy.web import create_app
        app = create_app(target, {"TESTING": True})
    except ImportError as exc:
        pytest.skip(f"the web app cannot be built yet in this checkout ({exc})")
    client = app.test_client()
    lines = [ln for ln in out.splitlines() if LINK.search(ln)]
    from jinja2 import TemplateNotFound
    for line in (lines[0], lines[1], lines[-1]):          # two still to answer, one submitted
        token = LINK.search(line).group(1)
        try:
            resp = client.get(f"/j/{token}", follow_redirects=True)
        except TemplateNotFound as exc:
            pytest.skip(f"the judge pages' templates are not written yet ({exc})")
        assert resp.status_code == 200, line
    assert client.get("/j/" + "x" * 32).status_code == 404
