"""The study store: the only module that speaks SQL.

One SQLite file per project (``PROJECT_DIR/labelstudy.sqlite``), opened with WAL journaling,
``foreign_keys=ON``, a ``busy_timeout`` and ``synchronous=FULL``. Every write is one ``BEGIN IMMEDIATE``
transaction, so a write either happens whole or not at all, and concurrent writers queue instead of failing.
The schema comes from numbered migrations (``labelstudy/migrations/NNN_name.sql``) recorded in
``schema_migration``; opening never drops or re-creates anything, and a database written by a newer
labelstudy is refused.

Entities (our names): study, solution (item, factor, loading, factor_correlation, solution_meta), round,
task, judge, invitation (a judge's personal link to a round), answer (long format, one row per
judge x round x task x item key) and event (an append-only log).

Answers are saved by client revision: ``save_answer`` inserts, or updates only when the incoming revision is
newer than the stored one; the same revision with the same content is a no-op (a double click or a resent
request changes nothing) and an older or conflicting revision is refused, never applied.
"""

from __future__ import annotations

import datetime as _dt
import functools
import hashlib
import hmac
import json
import secrets
import sqlite3
import threading
from contextlib import contextmanager
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any, Iterator

import pandas as pd

from labelstudy.errors import (NotFoundError, SchemaTooNewError, StaleRevisionError, StateError,
                               StorageUnavailableError, StoreError)

DB_NAME = "labelstudy.sqlite"
TASK_KINDS = ("open_sort", "label_match", "relevance", "essentiality", "definition_fit", "naming")
TOKEN_BYTES = 24  # 192 bits from `secrets`, URL-safe


def now() -> str:
    """UTC timestamp, ISO 8601 with microseconds (sorts as text)."""
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="microseconds")


def token_digest(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8", "surrogatepass")).hexdigest()


_WRITE_LOCKS: dict[str, threading.RLock] = {}
_WRITE_LOCKS_GUARD = threading.Lock()


def _write_lock(path: Path):
    """One lock per database file for the writers of this process.

    Threads of one server queue here and are woken the moment the previous commit ends, instead of in
    SQLite's busy handler, which polls with sleeps of up to 100 ms. Other processes still meet SQLite's
    own locking (``busy_timeout``), so correctness never depends on this lock.
    """
    key = str(path.resolve())
    with _WRITE_LOCKS_GUARD:
        return _WRITE_LOCKS.setdefault(key, threading.RLock())


@functools.lru_cache(maxsize=64)
def _parse_snapshot(text: str) -> dict:
    """Parsed round snapshot, cached by its text (a snapshot never changes once the round is open)."""
    return json.loads(text)


def _migrations() -> list[tuple[int, str, str]]:
    found = []
    for entry in resources.files("labelstudy").joinpath("migrations").iterdir():
        name = entry.name
        if name.endswith(".sql") and name[:3].isdigit():
            found.append((int(name[:3]), name, entry.read_text(encoding="utf-8")))
    return sorted(found)


SCHEMA_VERSION = max(n for n, _, _ in _migrations())


@dataclass(frozen=True)
class SaveOutcome:
    """What ``save_answer`` did: ``status`` is 'saved', 'unchanged', 'stale' or 'conflict'.

    'stale': the stored revision is newer; 'conflict': same revision number, different content. In both
    cases nothing was written and ``revision``/``value``/``comment`` are the stored ones.
    """

    status: str
    revision: int
    value: str | None
    comment: str
    answered_at: str

    @property
    def accepted(self) -> bool:
        return self.status in ("saved", "unchanged")


class Store:
    """All reads and writes of one project database.

    Connections are kept per thread (waitress serves requests from a thread pool); each is configured the
    same way. ``Store(path)`` creates the file when missing and applies pending migrations.
    """

    def __init__(self, path: str | Path, *, create: bool = True):
        self.path = Path(path)
        if not create and not self.path.exists():
            raise StoreError(f"no project database at {self.path}")
        self._local = threading.local()
        self._lock = _write_lock(self.path)
        self.migrate()

    # ------------------------------------------------------------------ connections and transactions
    def connect(self) -> sqlite3.Connection:
        conn = getattr(self._local, "conn", None)
        if conn is None:
            try:
                conn = sqlite3.connect(self.path, timeout=30, isolation_level=None,
                                       check_same_thread=False)
                conn.row_factory = sqlite3.Row
                conn.execute("PRAGMA busy_timeout = 30000")
                conn.execute("PRAGMA foreign_keys = ON")
                mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
                conn.execute("PRAGMA synchronous = FULL")
            except sqlite3.DatabaseError as exc:
                raise StoreError(f"{self.path} is not a labelstudy database ({exc})") from None
            if mode.lower() != "wal":
                conn.close()
                raise StoreError(f"{self.path}: could not switch the database to WAL mode")
            self._local.conn = conn
        return conn

    def close(self) -> None:
        conn = getattr(self._local, "conn", None)
        if conn is not None:
            conn.close()
            self._local.conn = None

    @contextmanager
    def write(self) -> Iterator[sqlite3.Connection]:
        """One ``BEGIN IMMEDIATE`` transaction: committed whole on success, rolled back on any error."""
        conn = self.connect()
        with self._lock:
            yield from self._transaction(conn)

    def _transaction(self, conn: sqlite3.Connection) -> Iterator[sqlite3.Connection]:
        try:
            conn.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            raise StorageUnavailableError(f"the database cannot be written just now ({exc})") from None
        try:
            yield conn
        except sqlite3.OperationalError as exc:   # disk full, read-only file, I/O error
            self._rollback(conn)
            raise StorageUnavailableError(f"the change could not be saved ({exc}); nothing was changed") from None
        except BaseException:
            self._rollback(conn)
            raise
        else:
            try:
                conn.execute("COMMIT")
            except sqlite3.Error as exc:
                self._rollback(conn)
                raise StorageUnavailableError(f"the change could not be saved ({exc}); nothing was changed") from None

    @staticmethod
    def _rollback(conn: sqlite3.Connection) -> None:
        try:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
        except sqlite3.Error:
            pass

    def _rows(self, sql: str, params: tuple | dict = ()) -> list[dict]:
        return [dict(r) for r in self.connect().execute(sql, params).fetchall()]

    def _one(self, sql: str, params: tuple | dict = ()) -> dict | None:
        row = self.connect().execute(sql, params).fetchone()
        return dict(row) if row is not None else None

    def migrate(self) -> int:
        """Apply pending numbered migrations; refuse a database from a newer version. Returns the version."""
        conn = self.connect()
        with self.write():
            conn.execute("CREATE TABLE IF NOT EXISTS schema_migration (version INTEGER PRIMARY KEY, "
                         "name TEXT NOT NULL, applied_at TEXT NOT NULL)")
            current = conn.execute("SELECT COALESCE(MAX(version), 0) FROM schema_migration").fetchone()[0]
            if current > SCHEMA_VERSION:
                raise SchemaTooNewError(
                    f"{self.path} was written by a newer labelstudy (schema {current}; this version knows "
                    f"up to {SCHEMA_VERSION}). Upgrade labelstudy to open it; nothing was changed.")
            for number, name, sql in _migrations():
                if number > current:
                    for statement in _split_sql(sql):
                        conn.execute(statement)
                    conn.execute("INSERT INTO schema_migration VALUES (?, ?, ?)", (number, name, now()))
        return self.schema_version()

    def schema_version(self) -> int:
        return self.connect().execute("SELECT MAX(version) FROM schema_migration").fetchone()[0]

    def integrity_check(self) -> str:
        return self.connect().execute("PRAGMA integrity_check").fetchone()[0]

    def backup(self, target: str | Path) -> Path:
        """Copy the whole database to ``target`` with SQLite's online backup API (safe while serving)."""
        target = Path(target)
        if target.resolve() == self.path.resolve():
            raise StoreError("the backup file cannot be the project database itself")
        tmp = target.with_name(target.name + ".partial")
        dest = sqlite3.connect(tmp)
        try:
            self.connect().backup(dest)
            dest.execute("PRAGMA journal_mode = DELETE")
        finally:
            dest.close()
        tmp.replace(target)
        return target

    # ------------------------------------------------------------------ settings and events
    def get_setting(self, key: str, default: str | None = None) -> str | None:
        row = self._one("SELECT value FROM setting WHERE key = ?", (key,))
        return row["value"] if row else default

    def set_setting(self, key: str, value: str) -> None:
        with self.write() as c:
            c.execute("INSERT INTO setting(key, value) VALUES (?, ?) "
                      "ON CONFLICT(key) DO UPDATE SET value = excluded.value", (key, value))

    def _event(self, c: sqlite3.Connection, kind: str, *, study_id=None, round_id=None, judge_id=None,
               **detail) -> None:
        c.execute("INSERT INTO event(at, study_id, round_id, judge_id, kind, detail) VALUES (?,?,?,?,?,?)",
                  (now(), study_id, round_id, judge_id, kind, json.dumps(detail, default=str)))

    def log_event(self, kind: str, **kw) -> None:
        with self.write() as c:
            self._event(c, kind, **kw)

    def events(self, *, study_id: int | None = None, limit: int = 200) -> list[dict]:
        if study_id is None:
            return self._rows("SELECT * FROM event ORDER BY id DESC LIMIT ?", (limit,))
        return self._rows("SELECT * FROM event WHERE study_id = ? ORDER BY id DESC LIMIT ?", (study_id, limit))

    # ------------------------------------------------------------------ login throttling
    def record_login_failure(self, remote: str, at: float) -> None:
        with self.write() as c:
            c.execute("INSERT INTO login_failure(at, remote) VALUES (?, ?)", (at, remote))
            c.execute("DELETE FROM login_failure WHERE at < ?", (at - 86400,))

    def login_failures_since(self, since: float, remote: str | None = None) -> int:
        if remote is None:
            return self._one("SELECT COUNT(*) n FROM login_failure WHERE at >= ?", (since,))["n"]
        return self._one("SELECT COUNT(*) n FROM login_failure WHERE at >= ? AND remote = ?",
                         (since, remote))["n"]

    def clear_login_failures(self, remote: str) -> None:
        with self.write() as c:
            c.execute("DELETE FROM login_failure WHERE remote = ?", (remote,))

    # ------------------------------------------------------------------ studies and solutions
    def create_study(self, title: str, solution: Any) -> int:
        """Store a study with its whole solution in one transaction; returns the study id."""
        title = (title or "").strip() or "Untitled study"
        with self.write() as c:
            cur = c.execute("INSERT INTO study(title, source, notes_json, created_at) VALUES (?,?,?,?)",
                            (title, solution.source or "", json.dumps(list(solution.notes)), now()))
            sid = cur.lastrowid
            factor_ids = [f.id for f in solution.factors]
            c.executemany("INSERT INTO factor(study_id, factor_id, position, name, definition) VALUES (?,?,?,?,?)",
                          [(sid, f.id, i, f.name, f.definition or "") for i, f in enumerate(solution.factors)])
            c.executemany(
                "INSERT INTO item(study_id, item_id, position, text, reverse_keyed, extras_json) "
                "VALUES (?,?,?,?,?,?)",
                [(sid, it.id, i, it.text, None if it.reverse_keyed is None else int(bool(it.reverse_keyed)),
                  json.dumps(dict(it.extras))) for i, it in enumerate(solution.items)])
            c.executemany("INSERT INTO loading(study_id, item_id, factor_id, value) VALUES (?,?,?,?)",
                          [(sid, it.id, f, float(v)) for it in solution.items for f, v in it.loadings])
            if solution.phi is not None:
                c.executemany(
                    "INSERT INTO factor_correlation(study_id, factor_a, factor_b, value) VALUES (?,?,?,?)",
                    [(sid, a, b, float(solution.phi[i][j])) for i, a in enumerate(factor_ids)
                     for j, b in enumerate(factor_ids)])
            c.executemany("INSERT INTO solution_meta(study_id, key, value) VALUES (?,?,?)",
                          [(sid, k, str(v)) for k, v in solution.meta])
            self._event(c, "study_created", study_id=sid, title=title, items=len(solution.items),
                        factors=len(factor_ids))
        return sid

    def list_studies(self) -> list[dict]:
        return self._rows("SELECT s.*, (SELECT COUNT(*) FROM item i WHERE i.study_id = s.id) AS n_items, "
                          "(SELECT COUNT(*) FROM factor f WHERE f.study_id = s.id) AS n_factors "
                          "FROM study s ORDER BY s.id")

    def get_study(self, study_id: int) -> dict:
        row = self._one("SELECT * FROM study WHERE id = ?", (study_id,))
        if row is None:
            raise NotFoundError(f"there is no study {study_id}")
        return row

    def factors(self, study_id: int) -> list[dict]:
        return self._rows("SELECT * FROM factor WHERE study_id = ? ORDER BY position", (study_id,))

    def items(self, study_id: int) -> list[dict]:
        return self._rows("SELECT * FROM item WHERE study_id = ? ORDER BY position", (study_id,))

    def get_solution(self, study_id: int):
        """Rebuild the stored solution as a :class:`labelstudy.solution.Solution` (with current edits)."""
        from labelstudy.solution import Factor, Item, Solution

        study = self.get_study(study_id)
        factors = self.factors(study_id)
        fids = [f["factor_id"] for f in factors]
        loads: dict[str, dict[str, float]] = {}
        for r in self._rows("SELECT item_id, factor_id, value FROM loading WHERE study_id = ?", (study_id,)):
            loads.setdefault(r["item_id"], {})[r["factor_id"]] = r["value"]
        items = tuple(
            Item(id=r["item_id"], text=r["text"],
                 loadings=tuple((f, loads.get(r["item_id"], {}).get(f, 0.0)) for f in fids),
                 reverse_keyed=None if r["reverse_keyed"] is None else bool(r["reverse_keyed"]),
                 extras=tuple(json.loads(r["extras_json"]).items()))
            for r in self.items(study_id))
        phi_rows = self._rows("SELECT factor_a, factor_b, value FROM factor_correlation WHERE study_id = ?",
                              (study_id,))
        phi = None
        if phi_rows:
            m = {(r["factor_a"], r["factor_b"]): r["value"] for r in phi_rows}
            phi = tuple(tuple(m[(a, b)] for b in fids) for a in fids)
        meta = tuple((r["key"], r["value"]) for r in
                     self._rows("SELECT key, value FROM solution_meta WHERE study_id = ? ORDER BY rowid",
                                (study_id,)))
        return Solution(items=items,
                        factors=tuple(Factor(id=f["factor_id"], name=f["name"], definition=f["definition"])
                                      for f in factors),
                        phi=phi, meta=meta, source=study["source"], notes=tuple(json.loads(study["notes_json"])))

    def update_factor(self, study_id: int, factor_id: str, *, name: str, definition: str,
                      expected_version: int) -> int:
        """Rename/redefine a factor if nobody changed it since ``expected_version``; returns the new version.

        Raises StaleRevisionError (nothing written) when another tab saved first.
        """
        name = (name or "").strip()
        if not name:
            raise StoreError(f"factor {factor_id}: the name cannot be empty")
        with self.write() as c:
            row = c.execute("SELECT version, name, definition FROM factor WHERE study_id = ? AND factor_id = ?",
                            (study_id, factor_id)).fetchone()
            if row is None:
                raise NotFoundError(f"study {study_id} has no factor {factor_id!r}")
            if row["version"] != expected_version:
                raise StaleRevisionError(
                    f"factor {factor_id} was changed elsewhere (now {row['name']!r}, version {row['version']}) "
                    f"after you opened it (version {expected_version}); reload to see the current text. "
                    "Nothing was overwritten.")
            c.execute("UPDATE factor SET name = ?, definition = ?, version = version + 1 "
                      "WHERE study_id = ? AND factor_id = ?", (name, definition.strip(), study_id, factor_id))
            self._event(c, "factor_edited", study_id=study_id, factor=factor_id, name=name)
        return expected_version + 1

    def update_item(self, study_id: int, item_id: str, *, text: str, expected_version: int) -> int:
        """Revise an item's wording, refusing stale edits like :meth:`update_factor`."""
        text = (text or "").strip()
        if not text:
            raise StoreError(f"item {item_id}: the text cannot be empty")
        with self.write() as c:
            row = c.execute("SELECT version FROM item WHERE study_id = ? AND item_id = ?",
                            (study_id, item_id)).fetchone()
            if row is None:
                raise NotFoundError(f"study {study_id} has no item {item_id!r}")
            if row["version"] != expected_version:
                raise StaleRevisionError(
                    f"item {item_id} was changed elsewhere (version {row['version']}) after you opened it "
                    f"(version {expected_version}); reload to see the current text. Nothing was overwritten.")
            c.execute("UPDATE item SET text = ?, version = version + 1 WHERE study_id = ? AND item_id = ?",
                      (text, study_id, item_id))
            self._event(c, "item_edited", study_id=study_id, item=item_id)
        return expected_version + 1

    # ------------------------------------------------------------------ rounds and tasks
    def create_round(self, study_id: int, *, tasks: list[tuple[str, dict]], title: str = "",
                     instructions: str = "", consent: str = "", deadline: str | None = None,
                     seed: int | None = None) -> int:
        """Create a draft round with its tasks (kind, config) in the given order; returns the round id."""
        self.get_study(study_id)
        if not tasks:
            raise StoreError("a round needs at least one task")
        for kind, _ in tasks:
            if kind not in TASK_KINDS:
                raise StoreError(f"unknown task kind {kind!r} (known: {', '.join(TASK_KINDS)})")
        seed = secrets.randbelow(2**31) if seed is None else int(seed)
        with self.write() as c:
            number = c.execute("SELECT COALESCE(MAX(number), 0) + 1 FROM round WHERE study_id = ?",
                               (study_id,)).fetchone()[0]
            rid = c.execute(
                "INSERT INTO round(study_id, number, title, instructions, consent, deadline, seed, created_at) "
                "VALUES (?,?,?,?,?,?,?,?)",
                (study_id, number, title or f"Round {number}", instructions, consent, deadline, seed,
                 now())).lastrowid
            c.executemany("INSERT INTO task(round_id, position, kind, config_json) VALUES (?,?,?,?)",
                          [(rid, i, kind, json.dumps(cfg or {})) for i, (kind, cfg) in enumerate(tasks)])
            self._event(c, "round_created", study_id=study_id, round_id=rid, number=number)
        return rid

    def get_round(self, round_id: int) -> dict:
        row = self._one("SELECT * FROM round WHERE id = ?", (round_id,))
        if row is None:
            raise NotFoundError(f"there is no round {round_id}")
        row["snapshot"] = _parse_snapshot(row["snapshot_json"]) if row["snapshot_json"] else None
        return row

    def round_by_number(self, study_id: int, number: int) -> dict:
        row = self._one("SELECT id FROM round WHERE study_id = ? AND number = ?", (study_id, number))
        if row is None:
            raise NotFoundError(f"study {study_id} has no round {number}")
        return self.get_round(row["id"])

    def list_rounds(self, study_id: int | None = None) -> list[dict]:
        if study_id is None:
            return self._rows("SELECT * FROM round ORDER BY study_id, number")
        return self._rows("SELECT * FROM round WHERE study_id = ? ORDER BY number", (study_id,))

    def update_round(self, round_id: int, *, expected_version: int, **fields) -> int:
        """Edit a draft round's title, instructions, consent or deadline, refusing stale edits."""
        allowed = {"title", "instructions", "consent", "deadline"}
        bad = set(fields) - allowed
        if bad:
            raise StoreError(f"cannot edit {', '.join(sorted(bad))} of a round")
        with self.write() as c:
            row = c.execute("SELECT version, status FROM round WHERE id = ?", (round_id,)).fetchone()
            if row is None:
                raise NotFoundError(f"there is no round {round_id}")
            if row["version"] != expected_version:
                raise StaleRevisionError("this round was changed in another tab or by another person; "
                                         "reload to see the current version. Nothing was overwritten.")
            for key, value in fields.items():
                c.execute(f"UPDATE round SET {key} = ? WHERE id = ?", (value, round_id))  # key is whitelisted
            c.execute("UPDATE round SET version = version + 1 WHERE id = ?", (round_id,))
        return expected_version + 1

    def tasks(self, round_id: int) -> list[dict]:
        rows = self._rows("SELECT * FROM task WHERE round_id = ? ORDER BY position", (round_id,))
        for r in rows:
            r["config"] = json.loads(r["config_json"])
        return rows

    def get_task(self, task_id: int) -> dict:
        row = self._one("SELECT * FROM task WHERE id = ?", (task_id,))
        if row is None:
            raise NotFoundError(f"there is no task {task_id}")
        row["config"] = json.loads(row["config_json"])
        return row

    def _set_status(self, round_id: int, new: str, allowed_from: tuple[str, ...], stamp: str | None,
                    snapshot: dict | None = None, unlock_submitted: bool = False) -> None:
        with self.write() as c:
            row = c.execute("SELECT status, study_id FROM round WHERE id = ?", (round_id,)).fetchone()
            if row is None:
                raise NotFoundError(f"there is no round {round_id}")
            if row["status"] not in allowed_from:
                raise StateError(f"round {round_id} is {row['status']}; it cannot become {new}")
            c.execute("UPDATE round SET status = ?, version = version + 1 WHERE id = ?", (new, round_id))
            if stamp:
                c.execute(f"UPDATE round SET {stamp} = ? WHERE id = ?", (now(), round_id))  # fixed names
            if snapshot is not None:
                c.execute("UPDATE round SET snapshot_json = ? WHERE id = ? AND snapshot_json IS NULL",
                          (json.dumps(snapshot), round_id))
            if unlock_submitted:
                c.execute("UPDATE invitation SET submitted_at = NULL WHERE round_id = ?", (round_id,))
            self._event(c, f"round_{new}", study_id=row["study_id"], round_id=round_id,
                        previous=row["status"])

    def open_round(self, round_id: int) -> None:
        """Open a draft round; freezes the items and factors judges will see (the round's snapshot)."""
        rnd = self.get_round(round_id)
        solution = self.get_solution(rnd["study_id"])
        self._set_status(round_id, "open", ("draft",), "opened_at", snapshot=solution.to_dict())

    def close_round(self, round_id: int) -> None:
        self._set_status(round_id, "closed", ("open",), "closed_at")

    def reopen_round(self, round_id: int) -> None:
        """Reopen a closed round; submitted judges are unlocked so they may revise their answers."""
        self._set_status(round_id, "open", ("closed",), None, unlock_submitted=True)

    def round_solution(self, round_id: int):
        """The solution as judges of this round saw it (the snapshot, or the live one for a draft)."""
        from labelstudy.solution import Solution

        rnd = self.get_round(round_id)
        if rnd["snapshot"] is not None:
            return Solution.from_dict(rnd["snapshot"])
        return self.get_solution(rnd["study_id"])

    # ------------------------------------------------------------------ judges and invitations
    def add_judge(self, round_id: int, display_name: str, *, email: str = "", expertise: str = "") -> dict:
        """Add a judge to the round's study and invite them; returns the invitation with its token."""
        display_name = (display_name or "").strip()
        if not display_name:
            raise StoreError("a judge needs a display name or an anonymous code")
        rnd = self.get_round(round_id)
        token = secrets.token_urlsafe(TOKEN_BYTES)
        with self.write() as c:
            jid = c.execute("INSERT INTO judge(study_id, display_name, email, expertise, created_at) "
                            "VALUES (?,?,?,?,?)",
                            (rnd["study_id"], display_name, email.strip(), expertise.strip(), now())).lastrowid
            c.execute("INSERT INTO invitation(judge_id, round_id, token, token_hash, created_at) "
                      "VALUES (?,?,?,?,?)", (jid, round_id, token, token_digest(token), now()))
            self._event(c, "judge_added", study_id=rnd["study_id"], round_id=round_id, judge_id=jid)
        return self.invitation_for(jid, round_id)

    def add_judges(self, round_id: int, rows: list[tuple[str, str, str]]) -> list[dict]:
        """Add several judges (display name, e-mail, expertise) and invite them, in ONE transaction.

        Either every judge of ``rows`` is added or none is. Returns their invitations in input order.
        """
        cleaned = []
        for k, (name, email, expertise) in enumerate(rows, start=1):
            name = (name or "").strip()
            if not name:
                raise StoreError(f"judge {k}: a judge needs a display name or an anonymous code")
            cleaned.append((name, (email or "").strip(), (expertise or "").strip()))
        rnd = self.get_round(round_id)
        ids = []
        with self.write() as c:
            for name, email, expertise in cleaned:
                token = secrets.token_urlsafe(TOKEN_BYTES)
                jid = c.execute("INSERT INTO judge(study_id, display_name, email, expertise, created_at) "
                                "VALUES (?,?,?,?,?)", (rnd["study_id"], name, email, expertise, now())).lastrowid
                c.execute("INSERT INTO invitation(judge_id, round_id, token, token_hash, created_at) "
                          "VALUES (?,?,?,?,?)", (jid, round_id, token, token_digest(token), now()))
                self._event(c, "judge_added", study_id=rnd["study_id"], round_id=round_id, judge_id=jid)
                ids.append(jid)
        return [self.invitation_for(jid, round_id) for jid in ids]

    def invite_existing(self, judge_id: int, round_id: int) -> dict:
        """Invite an existing judge of the study to another round (a new personal link)."""
        self.carry_over_panel(round_id, judge_ids=[judge_id])
        return self.invitation_for(judge_id, round_id)

    def carry_over_panel(self, round_id: int, *, from_round_id: int | None = None,
                         judge_ids: list[int] | None = None) -> int:
        """Invite to ``round_id`` the judges of an earlier round of the same study (or the given judges),
        each with a new personal link, in one transaction. Judges already invited are skipped; revoked
        judges of the earlier round are not carried over. Returns how many were invited."""
        rnd = self.get_round(round_id)
        with self.write() as c:
            if from_round_id is not None:
                src = c.execute("SELECT study_id FROM round WHERE id = ?", (from_round_id,)).fetchone()
                if src is None or src["study_id"] != rnd["study_id"]:
                    raise NotFoundError(f"round {from_round_id} is not a round of this study")
                judge_ids = [r[0] for r in c.execute(
                    "SELECT judge_id FROM invitation WHERE round_id = ? AND status = 'active' ORDER BY id",
                    (from_round_id,))]
            added = 0
            for jid in judge_ids or []:
                owner = c.execute("SELECT study_id FROM judge WHERE id = ?", (jid,)).fetchone()
                if owner is None or owner["study_id"] != rnd["study_id"]:
                    raise NotFoundError(f"judge {jid} is not on this study's panel")
                token = secrets.token_urlsafe(TOKEN_BYTES)
                added += c.execute(
                    "INSERT OR IGNORE INTO invitation(judge_id, round_id, token, token_hash, created_at) "
                    "VALUES (?,?,?,?,?)", (jid, round_id, token, token_digest(token), now())).rowcount
            self._event(c, "panel_carried_over", study_id=rnd["study_id"], round_id=round_id,
                        from_round=from_round_id, invited=added)
        return added

    _INV = ("SELECT i.id AS invitation_id, i.judge_id, i.round_id, i.token, i.status, i.created_at, "
            "i.consented_at, i.submitted_at, i.last_activity_at, i.revoked_at, j.display_name, j.email, "
            "j.expertise, j.study_id, r.status AS round_status, r.number AS round_number, "
            "(SELECT COUNT(*) FROM answer a WHERE a.judge_id = i.judge_id AND a.round_id = i.round_id "
            " AND a.value IS NOT NULL) AS n_answered "
            "FROM invitation i JOIN judge j ON j.id = i.judge_id JOIN round r ON r.id = i.round_id ")

    def invitation_for(self, judge_id: int, round_id: int) -> dict:
        row = self._one(self._INV + "WHERE i.judge_id = ? AND i.round_id = ?", (judge_id, round_id))
        if row is None:
            raise NotFoundError(f"judge {judge_id} has no invitation to round {round_id}")
        return row

    def invitations(self, round_id: int) -> list[dict]:
        return self._rows(self._INV + "WHERE i.round_id = ? ORDER BY i.id", (round_id,))

    def invitation_by_token(self, token: str) -> dict | None:
        """Find an invitation by its token (looked up by digest, then compared in constant time)."""
        if not isinstance(token, str) or not 16 <= len(token) <= 128:
            return None
        row = self._one(self._INV + "WHERE i.token_hash = ?", (token_digest(token),))
        if row is None or not hmac.compare_digest(row["token"].encode(), token.encode("utf-8", "surrogatepass")):
            return None
        return row

    def revoke(self, judge_id: int, round_id: int) -> None:
        with self.write() as c:
            n = c.execute("UPDATE invitation SET status = 'revoked', revoked_at = ? "
                          "WHERE judge_id = ? AND round_id = ? AND status = 'active'",
                          (now(), judge_id, round_id)).rowcount
            if not n:
                raise StateError(f"judge {judge_id} has no active link to round {round_id}")
            self._event(c, "link_revoked", round_id=round_id, judge_id=judge_id)

    def record_consent(self, judge_id: int, round_id: int) -> None:
        with self.write() as c:
            c.execute("UPDATE invitation SET consented_at = COALESCE(consented_at, ?), last_activity_at = ? "
                      "WHERE judge_id = ? AND round_id = ?", (now(), now(), judge_id, round_id))

    def _check_writable(self, c: sqlite3.Connection, judge_id: int, round_id: int) -> None:
        row = c.execute("SELECT i.status, i.submitted_at, r.status AS round_status FROM invitation i "
                        "JOIN round r ON r.id = i.round_id WHERE i.judge_id = ? AND i.round_id = ?",
                        (judge_id, round_id)).fetchone()
        if row is None:
            raise NotFoundError("this link does not belong to that round")
        if row["status"] != "active":
            raise StateError("this link has been withdrawn by the researcher; answers can no longer be saved")
        if row["round_status"] != "open":
            raise StateError("this round is not open; answers can no longer be saved")
        if row["submitted_at"]:
            raise StateError("your answers were submitted and are locked; the researcher can reopen them")

    def submit(self, judge_id: int, round_id: int) -> None:
        with self.write() as c:
            self._check_writable(c, judge_id, round_id)
            c.execute("UPDATE invitation SET submitted_at = ?, last_activity_at = ? "
                      "WHERE judge_id = ? AND round_id = ?", (now(), now(), judge_id, round_id))
            self._event(c, "submitted", round_id=round_id, judge_id=judge_id)

    # ------------------------------------------------------------------ answers
    def save_answer(self, judge_id: int, round_id: int, task_id: int, item: str, value: str | None,
                    comment: str = "", *, revision: int, seconds: float | None = None) -> SaveOutcome:
        """Upsert one answer in one transaction, by client revision (see the module docstring)."""
        return self.save_answers(judge_id, round_id, [(task_id, item, value, comment, revision, seconds)])[0]

    def save_answers(self, judge_id: int, round_id: int,
                     answers: list[tuple[int, str, str | None, str, int, float | None]]) -> list[SaveOutcome]:
        """Upsert several answers (task_id, item, value, comment, revision, seconds) in ONE transaction.

        Used by the no-JavaScript form, which posts a whole page at once. Either every accepted answer of
        the page is committed or none is; stale ones are reported, not applied.
        """
        for a in answers:
            if not isinstance(a[4], int) or isinstance(a[4], bool) or a[4] < 1:
                raise StoreError("revision must be a whole number of at least 1")
        with self.write() as c:
            self._check_writable(c, judge_id, round_id)
            return [self._save_one(c, judge_id, round_id, *a) for a in answers]

    def _save_one(self, c, judge_id, round_id, task_id, item, value, comment, revision, seconds) -> SaveOutcome:
        comment = comment or ""
        task = c.execute("SELECT round_id FROM task WHERE id = ?", (task_id,)).fetchone()
        if task is None or task["round_id"] != round_id:
            raise NotFoundError("that task is not part of this round")
        row = c.execute("SELECT value, comment, revision, answered_at FROM answer WHERE judge_id = ? AND "
                        "round_id = ? AND task_id = ? AND item = ?",
                        (judge_id, round_id, task_id, item)).fetchone()
        stamp = now()
        if row is not None and revision <= row["revision"]:
            same = row["value"] == value and row["comment"] == comment
            status = "unchanged" if (same and revision == row["revision"]) else (
                "conflict" if revision == row["revision"] else "stale")
            return SaveOutcome(status, row["revision"], row["value"], row["comment"], row["answered_at"])
        c.execute("INSERT INTO answer(judge_id, round_id, task_id, item, value, comment, answered_at, "
                  "revision, seconds) VALUES (?,?,?,?,?,?,?,?,?) "
                  "ON CONFLICT(judge_id, round_id, task_id, item) DO UPDATE SET value = excluded.value, "
                  "comment = excluded.comment, answered_at = excluded.answered_at, "
                  "revision = excluded.revision, seconds = COALESCE(excluded.seconds, answer.seconds)",
                  (judge_id, round_id, task_id, item, value, comment, stamp, revision, seconds))
        c.execute("UPDATE invitation SET last_activity_at = ? WHERE judge_id = ? AND round_id = ?",
                  (stamp, judge_id, round_id))
        return SaveOutcome("saved", revision, value, comment, stamp)

    def judge_answers(self, judge_id: int, round_id: int) -> list[dict]:
        return self._rows("SELECT task_id, item, value, comment, revision, answered_at FROM answer "
                          "WHERE judge_id = ? AND round_id = ? ORDER BY id", (judge_id, round_id))

    def answers(self, round_id: int) -> pd.DataFrame:
        """Every answer of a round in long format, joined with judge and task (one row per answer)."""
        rows = self._rows(
            "SELECT a.round_id, a.task_id, t.kind AS task_kind, t.position AS task_position, a.judge_id, "
            "j.display_name AS judge, j.expertise, a.item, a.value, a.comment, a.answered_at, a.revision, "
            "a.seconds FROM answer a JOIN task t ON t.id = a.task_id JOIN judge j ON j.id = a.judge_id "
            "WHERE a.round_id = ? ORDER BY t.position, a.judge_id, a.id", (round_id,))
        cols = ["round_id", "task_id", "task_kind", "task_position", "judge_id", "judge", "expertise", "item",
                "value", "comment", "answered_at", "revision", "seconds"]
        return pd.DataFrame(rows, columns=cols)

    def answers_state(self, round_id: int) -> tuple[int, str]:
        """(number of answers, latest answered_at + max revision): a cheap key for caching results."""
        row = self._one("SELECT COUNT(*) n, COALESCE(MAX(answered_at), '') at, COALESCE(SUM(revision), 0) s "
                        "FROM answer WHERE round_id = ?", (round_id,))
        inv = self._one("SELECT COALESCE(MAX(COALESCE(submitted_at, '')), '') s FROM invitation "
                        "WHERE round_id = ?", (round_id,))
        return row["n"], f"{row['at']}|{row['s']}|{inv['s']}"


def _split_sql(script: str) -> list[str]:
    """Split a migration script into statements (our migrations hold no semicolons inside literals)."""
    lines = [ln for ln in script.splitlines() if not ln.strip().startswith("--")]
    return [s.strip() for s in "\n".join(lines).split(";") if s.strip()]
