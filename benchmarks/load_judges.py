"""Load benchmark: many judges saving answers at once against a real ``labelstudy serve`` process.

Usage::

    .venv/bin/python benchmarks/load_judges.py [--judges 100] [--answers 50] [--threads 8] [--time-limit 120]

Builds a fresh project in a temporary folder (one study of 60 invented statements on 4 factors, one open
label-matching round, N judges), starts ``labelstudy serve`` on 127.0.0.1, and runs the judges
concurrently from a pool of client threads. Each judge opens its task page once (to read the link-bound
form token and the task id), then posts M answers to ``/j/<token>/save`` exactly as the form's script does:
new answers with stored revision + 1, identical resends (must come back 'unchanged') and a few stale
revisions (must be refused with 409). Every acknowledged save is then compared with the database.

The denominator is the raw SQLite commit rate on the same disk with the store's settings (WAL,
synchronous=FULL, one INSERT per transaction, one thread), measured in the same run.

Prints saves/s, latency percentiles, responses by status, the ratio to the raw commit rate and, last,
``lost answers: <n>``.
"""

from __future__ import annotations

import argparse
import concurrent.futures as cf
import sqlite3
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]

from helpers_reliability import (JudgeClient, LoadLog, Server, build_project, check_log_against_db,  # noqa: E402
                                 csrf_from_page, run_judge)


def raw_commit_rate(folder: Path, n: int = 2000) -> float:
    """Commits per second of one-row transactions on ``folder``'s disk with the store's PRAGMAs."""
    path = folder / "raw.sqlite"
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA synchronous = FULL")
    conn.execute("CREATE TABLE t (id INTEGER PRIMARY KEY, k TEXT, v TEXT, at TEXT)")
    t0 = time.perf_counter()
    for i in range(n):
        conn.execute("BEGIN IMMEDIATE")
        conn.execute("INSERT INTO t(k, v, at) VALUES (?, ?, ?)", (f"Q{i % 60}", "F1", str(time.time())))
        conn.execute("COMMIT")
    elapsed = time.perf_counter() - t0
    conn.close()
    return n / elapsed


def percentile(values: list[float], q: float) -> float:
    if not values:
        return float("nan")
    s = sorted(values)
    k = min(len(s) - 1, max(0, int(round(q / 100 * (len(s) - 1)))))
    return s[k]


def open_judge(port: int, token: str) -> tuple[str, int]:
    """Consent (if needed) and read the task page: returns (form token, task id)."""
    import re
    c = JudgeClient(port, token)
    try:
        status, html = c.get_page(f"/j/{token}")
        csrf = csrf_from_page(html)
        if csrf is None:
            raise RuntimeError(f"welcome page without a form token (status {status})")
        c.request("POST", f"/j/{token}/consent", f"csrf_token={csrf}".encode(),
                  {"Content-Type": "application/x-www-form-urlencoded"})
        status, html = c.get_page(f"/j/{token}/task/1")
        if status != 200:
            raise RuntimeError(f"task page answered {status}")
        m = re.search(r'data-task-id="(\d+)"', html)
        return csrf_from_page(html), int(m.group(1))
    finally:
        c.close()


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--judges", type=int, default=100)
    ap.add_argument("--answers", type=int, default=50, help="answers posted per judge")
    ap.add_argument("--threads", type=int, default=8, help="client threads (also the server's worker threads)")
    ap.add_argument("--server-threads", type=int, default=None, help="waitress threads (default: --threads)")
    ap.add_argument("--show-server-log", action="store_true", help="print the server's output at the end")
    ap.add_argument("--items", type=int, default=60)
    ap.add_argument("--time-limit", type=float, default=120.0, help="seconds for the whole load phase")
    args = ap.parse_args(argv)

    with tempfile.TemporaryDirectory(prefix="labelstudy-load-") as tmp:
        tmp = Path(tmp)
        raw_before = raw_commit_rate(tmp)
        built = build_project(tmp / "project", n_judges=args.judges, n_items=args.items, consent=False)
        built.store.close()
        server = Server(built.path, threads=args.server_threads or args.threads, log_dir=tmp)
        try:
            server.start()
            t_open = time.perf_counter()
            with cf.ThreadPoolExecutor(args.threads) as ex:
                opened = list(ex.map(lambda tok: open_judge(server.port, tok), built.tokens))
            open_s = time.perf_counter() - t_open
            log = LoadLog()
            deadline = time.monotonic() + args.time_limit
            t0 = time.perf_counter()
            with cf.ThreadPoolExecutor(args.threads) as ex:
                futures = [ex.submit(run_judge, server.port, tok, csrf, task_id, built.item_ids, built.choices,
                                     n_answers=args.answers, log=log, seed=k, deadline=deadline, sync=False)
                           for k, (tok, (csrf, task_id)) in enumerate(zip(built.tokens, opened))]
                failures = [f.exception() for f in futures if f.exception() is not None]
            elapsed = time.perf_counter() - t0
        finally:
            server.stop()
        result = check_log_against_db(log, built.path / "labelstudy.sqlite")
        server_log = server.logs()
        raw_after = raw_commit_rate(tmp / "project")   # same disk, measured again: shared disks vary
        raw = (raw_before + raw_after) / 2

    n = len(log.latencies)
    rate = n / elapsed if elapsed else float("nan")
    server_errors = sum(v for k, v in log.statuses.items() if isinstance(k, int) and k >= 500)
    lat = [x * 1000 for x in log.latencies]
    print(f"judges: {args.judges}, answers per judge: {args.answers}, client threads: {args.threads}, "
          f"server threads: {args.server_threads or args.threads}")
    print(f"opening {args.judges} judge pages (welcome, consent, task): {open_s:.2f} s")
    print(f"save requests answered: {n} in {elapsed:.2f} s -> {rate:.0f} saves/s")
    print(f"latency ms: p50 {percentile(lat, 50):.1f}, p95 {percentile(lat, 95):.1f}, "
          f"p99 {percentile(lat, 99):.1f}, max {max(lat) if lat else float('nan'):.1f}")
    print("responses by HTTP status: " + ", ".join(f"{k}: {v}" for k, v in sorted(log.statuses.items(), key=str)))
    print("save outcomes: " + ", ".join(f"{k}: {v}" for k, v in sorted(log.outcomes.items(), key=str)))
    print(f"server errors (5xx): {server_errors}; client failures: {len(failures)}")
    print(f"raw SQLite commit rate on this disk (WAL, synchronous=FULL, 1 thread): {raw:.0f} commits/s "
          f"(before the load {raw_before:.0f}, after {raw_after:.0f})")
    print(f"ratio saves/s to raw commits/s: {rate / raw:.2f}")
    print(f"acknowledged answers checked: {result['acked']}, rows in database: {result['rows']}, "
          f"never-sent rows: {len(result['foreign'])}, half-written rows: {len(result['half'])}")
    if args.show_server_log:
        print(server_log)
    for f in failures[:3]:
        print(f"client failure: {f!r}")
    print(f"lost answers: {len(result['lost'])}")
    return 0 if not result["lost"] and not server_errors and not failures else 1


if __name__ == "__main__":
    sys.exit(main())
