"""The CLI through Click's runner: init, links, backup, serve's refusals, and docs kept true."""

from __future__ import annotations

import json
import os
import re
import stat
from pathlib import Path

from click.testing import CliRunner

from labelstudy.cli import main
from labelstudy.project import open_project
from labelstudy.store import Store

ROOT = Path(__file__).resolve().parent.parent


def run(*args):
    result = CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)
    return result


def test_init_creates_project_with_private_secret(tmp_path):
    result = run("init", tmp_path / "p")
    assert result.exit_code == 0, result.output
    password = re.search(r"Researcher password: (\S+)", result.output).group(1)
    project = open_project(tmp_path / "p")
    assert project.check_password(password)
    assert not project.check_password(password + "x")
    mode = stat.S_IMODE(os.stat(project.secret_path).st_mode)
    assert mode == 0o600
    assert len(project.secret_key()) == 32


def test_init_twice_is_refused_and_changes_nothing(tmp_path):
    assert run("init", tmp_path / "p", "--password", "first password").exit_code == 0
    before = (tmp_path / "p" / "secret_key").read_bytes()
    result = run("init", tmp_path / "p", "--password", "second password")
    assert result.exit_code == 1
    assert "already holds a labelstudy project" in result.output
    assert "Traceback" not in result.output
    assert (tmp_path / "p" / "secret_key").read_bytes() == before
    assert open_project(tmp_path / "p").check_password("first password")


def test_commands_on_a_missing_project_fail_in_one_line(tmp_path):
    (tmp_path / "empty").mkdir()
    for args in (("links", tmp_path / "empty"), ("backup", tmp_path / "empty", "--to", tmp_path / "b.sqlite"),
                 ("serve", tmp_path / "empty")):
        result = run(*args)
        assert result.exit_code == 1, (args, result.output)
        assert "labelstudy init" in result.output
        assert len(result.output.strip().splitlines()) == 1


def test_links_json_and_backup(tmp_path):
    from tests.test_store import make_round
    run("init", tmp_path / "p", "--password", "first password")
    store = open_project(tmp_path / "p").store()
    sid, rid = make_round(store)
    a = store.add_judge(rid, "Judge A", expertise="ecologist")
    store.add_judge(rid, "Judge B")
    task = store.tasks(rid)[0]["id"]
    store.save_answer(a["judge_id"], rid, task, "Q1", "F1", revision=1)
    result = run("links", tmp_path / "p", "--json", "--base-url", "http://127.0.0.1:9999")
    assert result.exit_code == 0, result.output
    rows = json.loads(result.output)
    assert [r["name"] for r in rows] == ["Judge A", "Judge B"]
    assert rows[0]["link"] == f"http://127.0.0.1:9999/j/{a['token']}"
    assert rows[0]["status"] == "1 answered" and rows[1]["status"] == "not started"
    human = run("links", tmp_path / "p")
    assert "Judge B" in human.output and "not started" in human.output

    out = tmp_path / "copy.sqlite"
    result = run("backup", tmp_path / "p", "--to", out)
    assert result.exit_code == 0, result.output
    copy = Store(out, create=False)
    assert len(copy.answers(rid)) == 1


def test_every_cli_command_is_documented_in_readme():
    readme = (ROOT / "README.md").read_text()

    def walk(group, prefix):
        for name, cmd in group.commands.items():
            full = f"{prefix} {name}".strip()
            if hasattr(cmd, "commands"):
                yield from walk(cmd, full)
            else:
                yield full, cmd

    for full, cmd in walk(main, ""):
        assert f"labelstudy {full}" in readme, f"`labelstudy {full}` is not in README's command table"
        for param in cmd.params:
            for opt in getattr(param, "opts", []):
                if opt.startswith("--") and opt not in ("--help",):
                    assert opt in readme or opt in (cmd.help or ""), f"{full} {opt} undocumented"


def test_every_decision_rule_is_documented_in_readme():
    import json as _json
    readme = (ROOT / "README.md").read_text()
    rules = _json.loads((ROOT / "labelstudy" / "defaults" / "rules.json").read_text())["rules"]
    for key in rules:
        assert f"`{key}`" in readme, f"rule {key} is not in README's rules table"
