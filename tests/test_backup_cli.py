"""``labelstudy backup PROJECT --to FILE`` while a real server takes answers.

The copy is made with SQLite's online backup API; restored as a project it must hold every answer the
server acknowledged before the backup started, and pass ``PRAGMA integrity_check``.
"""

from __future__ import annotations

import os
import shutil
import sqlite3
import subprocess
import sys
import threading
import time

import pytest

from helpers_reliability import (REPO, LoadLog, Server, build_project, db_answers, form_csrf, run_judge)
from labelstudy.project import open_project


def _cli(*args, timeout=120):
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(REPO), env.get("PYTHONPATH", "")]).rstrip(os.pathsep)
    return subprocess.run([sys.executable, "-c", "from labelstudy.cli import main; main()", *map(str, args)],
                          capture_output=True, text=True, timeout=timeout, env=env, cwd=str(REPO))


@pytest.mark.slow
def test_backup_while_serving_holds_every_answer_acknowledged_before_it(tmp_path):
    built = build_project(tmp_path / "p", n_judges=6, n_items=30)
    built.store.close()
    log = LoadLog()
    server = Server(built.path, log_dir=tmp_path)
    stop = threading.Event()
    errors: list[BaseException] = []

    def judge(tok, seed):
        try:
            run_judge(server.port, tok, form_csrf(built.project, tok), built.task_id, built.item_ids,
                      built.choices, n_answers=600, log=log, seed=seed, deadline=time.monotonic() + 40,
                      stop=stop, sync=True)
        except BaseException as exc:
            errors.append(exc)

    target = tmp_path / "copies" / "backup.sqlite"
    target.parent.mkdir()
    threads = [threading.Thread(target=judge, args=(tok, k), daemon=True) for k, tok in enumerate(built.tokens)]
    try:
        server.start()
        for t in threads:
            t.start()
        end = time.monotonic() + 20
        while len(log.acked) < 60 and time.monotonic() < end:
            time.sleep(0.02)
        with log.lock:
            before = dict(log.acked)          # acknowledged before the backup started
        n_before = len(log.latencies)
        result = _cli("backup", built.path, "--to", target)
        time.sleep(0.2)
        during = len(log.latencies) - n_before
        stop.set()
        for t in threads:
            t.join(30)
    finally:
        stop.set()
        server.kill()
    assert result.returncode == 0, result.stderr
    assert "Backed up" in result.stdout
    assert not errors, errors[:3]
    assert len(before) >= 60 and during > 0, "the load should run before and while the backup is taken"
    assert not (target.parent / "backup.sqlite.partial").exists()
    assert not (target.parent / "backup.sqlite-wal").exists() or os.path.getsize(target.parent / "backup.sqlite-wal") == 0

    # restore: a project folder holding the copy, opened like any project
    restored = tmp_path / "restored"
    restored.mkdir()
    shutil.copy(target, restored / "labelstudy.sqlite")
    shutil.copy(built.path / "secret_key", restored / "secret_key")
    project = open_project(restored)
    store = project.store()
    assert store.integrity_check() == "ok"
    assert project.check_password("correct horse battery")
    rows = db_answers(restored / "labelstudy.sqlite")
    missing = [(k, v) for k, v in before.items()
               if k not in rows or rows[k]["revision"] < v[0] or (rows[k]["revision"] == v[0] and rows[k]["value"] != v[1])]
    assert missing == []
    assert len(store.invitations(built.round_id)) == 6
    store.close()


def test_backup_refuses_the_project_database_itself(tmp_path):
    built = build_project(tmp_path / "p", n_judges=1, n_items=4)
    built.store.close()
    result = _cli("backup", built.path, "--to", built.path / "labelstudy.sqlite")
    assert result.returncode != 0 and "cannot be the project database" in result.stderr
    assert "Traceback" not in result.stderr
    conn = sqlite3.connect(built.path / "labelstudy.sqlite")
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    conn.close()
