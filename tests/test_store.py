"""The study store: migrations, round trips, lifecycle and the answer upsert rules, on a real SQLite file."""

from __future__ import annotations

import sqlite3
import threading

import pytest

from labelstudy.errors import (NotFoundError, SchemaTooNewError, StaleRevisionError, StateError,
                               StoreError)
from labelstudy.solution import Factor, Item, Solution
from labelstudy.store import SCHEMA_VERSION, Store


def small_solution(n_items=6):
    factors = (Factor("F1", "Skill growth", "Learning practical skills."),
               Factor("F2", "Neighbourly ties", "Getting to know neighbours."))
    items = tuple(
        Item(id=f"Q{i}", text=f"Statement {i}",
             loadings=(("F1", 0.7 if i % 2 else 0.1), ("F2", 0.1 if i % 2 else 0.65)),
             reverse_keyed=None, extras=(("h2", "0.5"),))
        for i in range(1, n_items + 1))
    return Solution(items=items, factors=factors, phi=((1.0, 0.55), (0.55, 1.0)),
                    meta=(("rotation", "oblimin"), ("n", "412")), source="test", notes=())


def make_round(store, kinds=("label_match",)):
    sid = store.create_study("Orchard study", small_solution())
    rid = store.create_round(sid, tasks=[(k, {}) for k in kinds], instructions="Read", consent="OK", seed=7)
    store.open_round(rid)
    return sid, rid


def test_migrations_from_an_empty_file(tmp_path):
    path = tmp_path / "x.sqlite"
    store = Store(path)
    assert store.schema_version() == SCHEMA_VERSION
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    assert {"study", "item", "factor", "loading", "round", "task", "judge", "invitation", "answer",
            "event", "schema_migration"} <= tables
    # opening again applies nothing twice and keeps data
    store.set_setting("k", "v")
    store.close()
    again = Store(path)
    assert again.get_setting("k") == "v"
    assert again.connect().execute("SELECT COUNT(*) FROM schema_migration").fetchone()[0] == SCHEMA_VERSION


def test_newer_schema_is_refused(tmp_path):
    path = tmp_path / "x.sqlite"
    Store(path).close()
    conn = sqlite3.connect(path)
    conn.execute("INSERT INTO schema_migration VALUES (999, 'future.sql', 'later')")
    conn.commit()
    conn.close()
    with pytest.raises(SchemaTooNewError, match="newer labelstudy"):
        Store(path)


def test_not_a_database_is_refused(tmp_path):
    path = tmp_path / "x.sqlite"
    path.write_bytes(b"this is not sqlite at all" * 100)
    with pytest.raises(StoreError, match="not a labelstudy database"):
        Store(path)


def test_pragmas(store):
    conn = store.connect()
    assert conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    assert conn.execute("PRAGMA busy_timeout").fetchone()[0] >= 1000


def test_solution_round_trip(store):
    sol = small_solution()
    sid = store.create_study("Orchard study", sol)
    back = store.get_solution(sid)
    assert back.items == sol.items
    assert back.factors == sol.factors
    assert back.phi == sol.phi
    assert back.meta == sol.meta


def test_failed_study_import_leaves_nothing(store):
    bad = small_solution()
    # a loading outside [-1, 1] violates the CHECK constraint half way through the inserts
    items = list(bad.items)
    items[3] = Item(id="Q4", text="x", loadings=(("F1", 2.0), ("F2", 0.1)), reverse_keyed=None)
    bad = Solution(items=tuple(items), factors=bad.factors, phi=bad.phi, meta=bad.meta, source="", notes=())
    with pytest.raises(sqlite3.IntegrityError):
        store.create_study("Broken", bad)
    assert store.list_studies() == []
    assert store.connect().execute("SELECT COUNT(*) FROM item").fetchone()[0] == 0


def test_stale_factor_edit_is_refused(store):
    sid = store.create_study("S", small_solution())
    v2 = store.update_factor(sid, "F1", name="Practical skills", definition="d", expected_version=1)
    assert v2 == 2
    with pytest.raises(StaleRevisionError, match="changed elsewhere"):
        store.update_factor(sid, "F1", name="Other tab", definition="d", expected_version=1)
    assert store.factors(sid)[0]["name"] == "Practical skills"


def test_round_lifecycle_and_snapshot(store):
    sid, rid = make_round(store)
    assert store.get_round(rid)["status"] == "open"
    store.update_factor(sid, "F1", name="Renamed later", definition="", expected_version=1)
    assert store.round_solution(rid).factor("F1").name == "Skill growth"   # judges keep what they saw
    store.close_round(rid)
    with pytest.raises(StateError):
        store.close_round(rid)
    store.reopen_round(rid)
    assert store.get_round(rid)["status"] == "open"
    with pytest.raises(StoreError, match="unknown task kind"):
        store.create_round(sid, tasks=[("guessing", {})])


def test_answer_upsert_rules(store):
    sid, rid = make_round(store)
    task = store.tasks(rid)[0]["id"]
    inv = store.add_judge(rid, "Judge A", expertise="ecologist")
    j = inv["judge_id"]
    assert store.save_answer(j, rid, task, "Q1", "F1", revision=1).status == "saved"
    assert store.save_answer(j, rid, task, "Q1", "F1", revision=1).status == "unchanged"   # resent
    assert store.save_answer(j, rid, task, "Q1", "F2", revision=1).status == "conflict"
    assert store.save_answer(j, rid, task, "Q1", "F2", revision=3).status == "saved"
    old = store.save_answer(j, rid, task, "Q1", "none", revision=2)
    assert old.status == "stale" and old.value == "F2" and old.revision == 3
    rows = store.answers(rid)
    assert len(rows) == 1 and rows.iloc[0]["value"] == "F2" and rows.iloc[0]["revision"] == 3
    with pytest.raises(StoreError):
        store.save_answer(j, rid, task, "Q2", "F1", revision=0)


def test_batch_save_is_one_transaction(store):
    sid, rid = make_round(store)
    task = store.tasks(rid)[0]["id"]
    j = store.add_judge(rid, "Judge A")["judge_id"]
    with pytest.raises(NotFoundError):
        store.save_answers(j, rid, [(task, "Q1", "F1", "", 1, None), (99999, "Q2", "F1", "", 1, None)])
    assert store.judge_answers(j, rid) == []


def test_locks_after_submit_revoke_and_close(store):
    sid, rid = make_round(store)
    task = store.tasks(rid)[0]["id"]
    a = store.add_judge(rid, "A")["judge_id"]
    b = store.add_judge(rid, "B")["judge_id"]
    c = store.add_judge(rid, "C")["judge_id"]
    store.save_answer(a, rid, task, "Q1", "F1", revision=1)
    store.submit(a, rid)
    with pytest.raises(StateError, match="submitted"):
        store.save_answer(a, rid, task, "Q1", "F2", revision=2)
    store.revoke(b, rid)
    with pytest.raises(StateError, match="withdrawn"):
        store.save_answer(b, rid, task, "Q1", "F2", revision=1)
    store.close_round(rid)
    with pytest.raises(StateError, match="not open"):
        store.save_answer(c, rid, task, "Q1", "F2", revision=1)
    store.reopen_round(rid)
    assert store.save_answer(a, rid, task, "Q1", "F2", revision=2).status == "saved"


def test_tokens(store):
    sid, rid = make_round(store)
    inv = store.add_judge(rid, "A")
    token = inv["token"]
    assert len(token) >= 22   # >= 128 bits of secrets.token_urlsafe
    assert store.invitation_by_token(token)["judge_id"] == inv["judge_id"]
    assert store.invitation_by_token(token[:-1] + ("x" if token[-1] != "x" else "y")) is None
    assert store.invitation_by_token("") is None
    row = store.connect().execute("SELECT token_hash FROM invitation").fetchone()[0]
    assert row != token and len(row) == 64


def test_concurrent_writers_do_not_lose_answers(project):
    store = project.store()
    sid, rid = make_round(store)
    task = store.tasks(rid)[0]["id"]
    judges = [store.add_judge(rid, f"J{i}")["judge_id"] for i in range(4)]

    def work(j):
        s = project.store()
        for k in range(1, 26):
            assert s.save_answer(j, rid, task, f"Q{k % 6 + 1}", "F1", revision=k).accepted

    threads = [threading.Thread(target=work, args=(j,)) for j in judges]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    df = store.answers(rid)
    assert len(df) == 4 * 6
    assert store.integrity_check() == "ok"


def test_backup_restores_every_answer(project, tmp_path):
    store = project.store()
    sid, rid = make_round(store)
    task = store.tasks(rid)[0]["id"]
    j = store.add_judge(rid, "A")["judge_id"]
    for k in range(1, 7):
        store.save_answer(j, rid, task, f"Q{k}", "F2", revision=1)
    out = store.backup(tmp_path / "copy.sqlite")
    restored = Store(out, create=False)
    assert restored.answers(rid).equals(store.answers(rid))
    assert restored.integrity_check() == "ok"


def test_carry_over_panel_to_a_new_round(store):
    sid, r1 = make_round(store)
    a = store.add_judge(r1, "A")["judge_id"]
    b = store.add_judge(r1, "B")["judge_id"]
    store.add_judge(r1, "C")
    store.revoke(b, r1)
    r2 = store.create_round(sid, tasks=[("label_match", {})], seed=3)
    assert store.carry_over_panel(r2, from_round_id=r1) == 2          # A and C; B was revoked
    assert store.carry_over_panel(r2, from_round_id=r1) == 0          # already invited: skipped
    tokens = {i["judge_id"]: i["token"] for i in store.invitations(r2)}
    assert a in tokens and b not in tokens
    assert tokens[a] != store.invitation_for(a, r1)["token"]          # a new personal link
    other = store.create_study("Other", small_solution())
    r3 = store.create_round(other, tasks=[("label_match", {})])
    with pytest.raises(NotFoundError):
        store.carry_over_panel(r3, from_round_id=r1)
