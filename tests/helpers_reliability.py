"""Builders for the reliability and security tests and the load benchmark.

A project with one study (an invented community-orchard scenario: why volunteers come, four factors),
one open round holding a label-matching task and N invited judges; a real ``labelstudy serve``
subprocess on 127.0.0.1; and a small keep-alive HTTP judge client that posts answers through the same
JSON path the form's script uses and keeps a log of every request sent and every save acknowledged, so
that the database can be compared with what the server promised.
"""

from __future__ import annotations

import hashlib
import hmac
import http.client
import json
import os
import random
import re
import signal
import socket
import sqlite3
import subprocess
import sys
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path

from labelstudy.project import init_project
from labelstudy.solution import Factor, Item, Solution

__all__ = ["PASSWORD", "orchard_solution", "build_project", "Built", "free_port", "Server", "JudgeClient",
           "LoadLog", "run_judge", "form_csrf", "csrf_from_page", "db_answers", "check_log_against_db"]

PASSWORD = "correct horse battery"
REPO = Path(__file__).resolve().parent.parent

FACTORS = (
    Factor("F1", "Belonging", "Feeling part of a group of neighbours who share the orchard work."),
    Factor("F2", "Learning", "Gaining practical skills in pruning, grafting and tending fruit trees."),
    Factor("F3", "Care for the land", "Looking after the soil, the trees and the wildlife of the orchard."),
    Factor("F4", "Harvest share", "Taking home fruit, juice and preserves from the shared harvest."),
)
_STEMS = {
    "F1": "I come for the company of the other volunteers",
    "F2": "I come to learn how fruit trees are cared for",
    "F3": "I come because the orchard's wildlife matters to me",
    "F4": "I come for the apples and pears I take home",
}


def orchard_solution(n_items: int = 60, n_factors: int = 4, *, text_extra: str = "") -> Solution:
    """``n_items`` invented statements, each loading mainly on one of ``n_factors`` factors (<= 4 named ones,
    more get generic names)."""
    factors = list(FACTORS[:n_factors])
    for k in range(len(factors), n_factors):
        factors.append(Factor(f"F{k + 1}", f"Motive {k + 1}", f"Another reason to volunteer, number {k + 1}."))
    fids = [f.id for f in factors]
    items = []
    for i in range(n_items):
        main = fids[i % len(fids)]
        loads = tuple((f, 0.62 + 0.01 * (i % 7) if f == main else 0.05 + 0.01 * ((i + j) % 5))
                      for j, f in enumerate(fids))
        stem = _STEMS.get(main, f"I come for reason {main}")
        items.append(Item(id=f"Q{i + 1:03d}", text=f"{stem} (statement {i + 1}).{text_extra}", loadings=loads,
                          reverse_keyed=False))
    phi = tuple(tuple(1.0 if a == b else 0.2 for b in fids) for a in fids)
    return Solution(items=tuple(items), factors=tuple(factors), phi=phi, meta=(("extraction", "minres"),),
                    source="orchard-reliability", notes=())


@dataclass
class Built:
    path: Path
    project: object
    store: object
    study_id: int
    round_id: int
    task_id: int
    tokens: list
    judge_ids: list
    item_ids: list
    choices: list


def build_project(path: Path, *, n_judges: int = 4, n_items: int = 60, consent: bool = True,
                  tasks=None) -> Built:
    """A fresh project at ``path`` with one study, one OPEN round (label matching) and ``n_judges`` judges."""
    path = Path(path)
    project, _ = init_project(path, password=PASSWORD)
    store = project.store()
    solution = orchard_solution(n_items)
    sid = store.create_study("Why we volunteer at the orchard", solution)
    rid = store.create_round(sid, tasks=list(tasks or [("label_match", {"show": "both"})]), title="Round 1",
                             consent="Your answers are kept with a code.", seed=99)
    store.open_round(rid)
    invs = store.add_judges(rid, [(f"Judge {k + 1:03d}", "", "") for k in range(n_judges)])
    if consent:
        for inv in invs:
            store.record_consent(inv["judge_id"], rid)
    task_id = store.tasks(rid)[0]["id"]
    return Built(path, project, store, sid, rid, task_id, [i["token"] for i in invs], [i["judge_id"] for i in invs],
                 [it.id for it in solution.items], [f.id for f in solution.factors] + ["none"])


def form_csrf(project, token: str) -> str:
    """The judge form's link-bound token, computed from the project's secret key (as the server does)."""
    key = project.secret_key()
    return hmac.new(key, ("judge-form:" + token).encode(), hashlib.sha256).hexdigest()


_CSRF_RE = re.compile(r'data-csrf="([0-9a-f]{64})"')
_CSRF_FIELD_RE = re.compile(r'name="csrf_token" value="([^"]+)"')


def csrf_from_page(html: str) -> str | None:
    m = _CSRF_RE.search(html) or _CSRF_FIELD_RE.search(html)
    return m.group(1) if m else None


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Server:
    """``labelstudy serve PROJECT --port P`` as a subprocess on 127.0.0.1 (output kept in log files)."""

    def __init__(self, project_dir: Path, *, port: int | None = None, threads: int = 8, log_dir: Path | None = None):
        self.project_dir = Path(project_dir)
        self.port = port or free_port()
        self.threads = threads
        self.log_dir = Path(log_dir or self.project_dir.parent)
        self.proc: subprocess.Popen | None = None
        self.starts = 0

    @property
    def base(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def start(self, timeout: float = 30.0) -> "Server":
        self.starts += 1
        out = open(self.log_dir / f"server-{self.port}-{self.starts}.log", "wb")
        cmd = [sys.executable, "-c", "from labelstudy.cli import main; main()", "serve", str(self.project_dir),
               "--host", "127.0.0.1", "--port", str(self.port), "--threads", str(self.threads)]
        env = dict(os.environ)
        env["PYTHONPATH"] = os.pathsep.join([str(REPO), env.get("PYTHONPATH", "")]).rstrip(os.pathsep)
        self.proc = subprocess.Popen(cmd, stdout=out, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
                                     env=env, cwd=str(REPO))
        out.close()
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            if self.proc.poll() is not None:
                raise RuntimeError(f"the server exited with {self.proc.returncode}: {self.logs()[-2000:]}")
            try:
                conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=2)
                conn.request("GET", "/r/login")
                if conn.getresponse().status == 200:
                    conn.close()
                    return self
            except OSError:
                time.sleep(0.05)
        self.stop()
        raise RuntimeError("the server did not answer in time")

    def kill(self) -> None:
        """SIGKILL: no cleanup, no flush; what a power cut or an OOM kill does to the process."""
        if self.proc is not None and self.proc.poll() is None:
            os.kill(self.proc.pid, signal.SIGKILL)
            self.proc.wait(10)

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(10)
            except subprocess.TimeoutExpired:
                self.kill()

    def logs(self) -> str:
        return "\n".join(p.read_text(errors="replace") for p in sorted(self.log_dir.glob(f"server-{self.port}-*.log")))


class JudgeClient:
    """One judge's keep-alive connection (http.client), JSON in and out."""

    def __init__(self, base_port: int, token: str, *, timeout: float = 30.0):
        self.port, self.token, self.timeout = base_port, token, timeout
        self.conn = http.client.HTTPConnection("127.0.0.1", base_port, timeout=timeout)

    def request(self, method: str, path: str, body: bytes | None = None, headers: dict | None = None):
        try:
            self.conn.request(method, path, body=body, headers=headers or {})
            resp = self.conn.getresponse()
            data = resp.read()
        except (http.client.HTTPException, OSError):
            self.conn.close()
            self.conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=self.timeout)
            raise
        return resp.status, data

    def get_page(self, path: str) -> tuple[int, str]:
        status, data = self.request("GET", path)
        return status, data.decode("utf-8", "replace")

    def save(self, csrf: str, body: dict) -> tuple[int, dict]:
        status, data = self.request("POST", f"/j/{self.token}/save", json.dumps(body).encode(),
                                    {"Content-Type": "application/json", "Accept": "application/json",
                                     "X-CSRF-Token": csrf})
        try:
            return status, json.loads(data)
        except ValueError:
            return status, {"_raw": data[:200].decode("utf-8", "replace")}

    def state(self) -> dict:
        status, data = self.request("GET", f"/j/{self.token}/state", headers={"Accept": "application/json"})
        if status != 200:
            raise RuntimeError(f"state: {status}")
        return json.loads(data)

    def close(self) -> None:
        self.conn.close()


@dataclass
class LoadLog:
    """Thread-safe record of what was sent and what the server acknowledged."""

    sent: dict = field(default_factory=dict)       # (token, task, item, rev) -> value (every send)
    acked: dict = field(default_factory=dict)      # (token, task, item) -> (rev, value) highest acknowledged
    latencies: list = field(default_factory=list)  # seconds, per save request answered
    statuses: dict = field(default_factory=dict)   # HTTP status (or "neterr") -> count
    outcomes: dict = field(default_factory=dict)   # JSON status -> count
    lock: threading.Lock = field(default_factory=threading.Lock)

    def count(self, status, outcome=None):
        with self.lock:
            self.statuses[status] = self.statuses.get(status, 0) + 1
            if outcome is not None:
                self.outcomes[outcome] = self.outcomes.get(outcome, 0) + 1


def run_judge(port: int, token: str, csrf: str, task_id: int, items: list, choices: list, *, n_answers: int,
              log: LoadLog, seed: int, deadline: float, stop: threading.Event | None = None,
              resend_every: int = 7, stale_every: int = 11, sync: bool = True) -> None:
    """Post ``n_answers`` answers for one judge, some resent and a few deliberately stale.

    Revision rules exercised: a new answer carries stored revision + 1 (saved), an identical resend of
    the last acknowledged revision must come back 'unchanged', and an older revision with another value
    must be refused with 409 and never applied. With ``sync`` the client first reads ``/state`` (what
    the form does on load) so it continues from the revisions the server holds.
    """
    rng = random.Random(seed)
    client = JudgeClient(port, token)
    revs: dict[str, int] = {}
    values: dict[str, str] = {}
    try:
        if sync:
            for a in client.state()["answers"]:
                if a["task_id"] == task_id:
                    revs[a["item"]], values[a["item"]] = a["revision"], a["value"]
        keys = rng.sample(items, k=min(len(items), max(1, n_answers // 2)))
        for k in range(n_answers):
            if time.monotonic() > deadline or (stop is not None and stop.is_set()):
                return
            item = rng.choice(keys)
            if k % stale_every == stale_every - 1 and revs.get(item, 0) >= 2:
                # a stale revision from "another device": must be refused, never applied
                rev, value = revs[item] - 1, rng.choice([c for c in choices if c != values[item]])
                expect_refusal = True
            elif k % resend_every == resend_every - 1 and item in revs:
                rev, value = revs[item], values[item]     # a resent request: must change nothing
                expect_refusal = False
            else:
                rev, value = revs.get(item, 0) + 1, rng.choice(choices)
                expect_refusal = False
            with log.lock:
                log.sent[(token, task_id, item, rev)] = value if not expect_refusal else \
                    log.sent.get((token, task_id, item, rev), value)
            t0 = time.perf_counter()
            try:
                status, body = client.save(csrf, {"task_id": task_id, "item": item, "value": value,
                                                  "comment": "", "revision": rev, "seconds": 1.5})
            except (http.client.HTTPException, OSError):
                log.count("neterr")
                if stop is not None and stop.is_set():
                    return
                time.sleep(0.05)
                return          # connection gone (server killed): this judge stops; the in-flight save is unknown
            with log.lock:
                log.latencies.append(time.perf_counter() - t0)
            log.count(status, body.get("status"))
            if status == 200 and body.get("status") in ("saved", "unchanged"):
                if body["revision"] != rev or body["value"] != value:
                    raise AssertionError(f"acknowledged something else than sent: {body} for rev {rev} {value}")
                with log.lock:
                    prev = log.acked.get((token, task_id, item))
                    if prev is None or prev[0] <= rev:
                        log.acked[(token, task_id, item)] = (rev, value)
                revs[item], values[item] = rev, value
            elif status == 409:
                if not expect_refusal and body.get("status") not in ("stale", "conflict"):
                    raise AssertionError(f"unexpected 409 body {body}")
                revs[item], values[item] = body["revision"], body["value"]
    finally:
        client.close()


def db_answers(db_path: Path) -> dict:
    """(token, task, item) -> row dict, read with a fresh read-only connection."""
    conn = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True)
    conn.row_factory = sqlite3.Row
    try:
        rows = conn.execute("SELECT i.token, a.task_id, a.item, a.value, a.comment, a.revision, a.answered_at "
                            "FROM answer a JOIN invitation i ON i.judge_id = a.judge_id AND "
                            "i.round_id = a.round_id").fetchall()
        return {(r["token"], r["task_id"], r["item"]): dict(r) for r in rows}
    finally:
        conn.close()


def check_log_against_db(log: LoadLog, db_path: Path) -> dict:
    """Compare the log with the database; returns counts of lost, foreign and half-written answers.

    lost: an acknowledged save whose revision or value is missing from the database (stored revision lower,
    or the same revision with another value). foreign: a stored answer that no request ever sent
    (key, revision and value). half: a stored row without value/revision/answered_at.
    """
    rows = db_answers(db_path)
    lost = []
    for key, (rev, value) in log.acked.items():
        row = rows.get(key)
        if row is None or row["revision"] < rev or (row["revision"] == rev and row["value"] != value):
            lost.append((key, rev, value, row))
    foreign = [(k, r) for k, r in rows.items()
               if log.sent.get((*k, r["revision"]), object()) != r["value"]]
    half = [(k, r) for k, r in rows.items() if r["revision"] is None or r["revision"] < 1
            or not r["answered_at"] or r["value"] is None]
    return {"lost": lost, "foreign": foreign, "half": half, "rows": len(rows), "acked": len(log.acked)}
