"""``labelstudy report``: score a round and write every result file, without a server."""

from __future__ import annotations

import time
from pathlib import Path

import click

__all__ = ["report"]


def _pick_round(store, round_number: int | None, study_id: int | None) -> dict:
    from labelstudy.errors import LabelstudyError
    studies = store.list_studies()
    if not studies:
        raise LabelstudyError("the project has no study yet")
    if study_id is None:
        if len(studies) > 1:
            raise LabelstudyError("the project holds several studies ("
                                  + ", ".join(str(s["id"]) for s in studies) + "); choose one with --study")
        study_id = studies[0]["id"]
    store.get_study(study_id)
    if round_number is not None:
        return store.round_by_number(study_id, round_number)
    rounds = store.list_rounds(study_id)
    if not rounds:
        raise LabelstudyError(f"study {study_id} has no round yet")
    answered = [r for r in rounds if store.answers_state(r["id"])[0] > 0]
    return store.get_round((answered or rounds)[-1]["id"])


@click.command("report")
@click.argument("project_dir", type=click.Path(file_okay=False, path_type=Path))
@click.option("--round", "round_number", type=int, help="Round number (default: the latest with answers).")
@click.option("--study", "study_id", type=int, help="Study id (needed when the project holds several).")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False, path_type=Path),
              help="Folder to write the files into (created if needed).")
def report(project_dir: Path, round_number: int | None, study_id: int | None, out_dir: Path) -> None:
    """Write report.html, results.xlsx, answers.csv, answers-excel.csv, results.json and methods.md."""
    from labelstudy.cli import domain_errors

    domain_errors(_run)(project_dir, round_number, study_id, out_dir)


def _run(project_dir: Path, round_number: int | None, study_id: int | None, out_dir: Path) -> None:
    from labelstudy.errors import LabelstudyError
    from labelstudy.project import open_project
    from labelstudy.results import (EXPORTS, compare_rounds, earlier_round, export_bytes, load_rules,
                                    score_round)

    project = open_project(project_dir)
    store = project.store()
    rnd = _pick_round(store, round_number, study_id)
    steps = len(EXPORTS) + 1
    t0 = time.perf_counter()
    click.echo(f"[1/{steps}] scoring round {rnd['number']} of study {rnd['study_id']} ... ", nl=False)
    rules = load_rules(project.path)
    results = score_round(store, rnd["id"], rules=rules)
    prev = earlier_round(store, rnd["id"])
    comparison = compare_rounds(score_round(store, prev, rules=rules), results) if prev is not None else None
    click.echo(f"done ({time.perf_counter() - t0:.1f} s)")
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise LabelstudyError(f"cannot create the output folder {out_dir} ({exc.strerror})") from None
    for k, name in enumerate(EXPORTS, start=2):
        t = time.perf_counter()
        click.echo(f"[{k}/{steps}] writing {name} ... ", nl=False)
        try:
            (out_dir / name).write_bytes(export_bytes(results, name, comparison=comparison))
        except OSError as exc:
            raise LabelstudyError(f"cannot write {out_dir / name} ({exc.strerror})") from None
        click.echo(f"done ({time.perf_counter() - t:.1f} s)")
    click.echo(f"Wrote {len(EXPORTS)} files to {out_dir}")
