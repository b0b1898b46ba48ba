"""Reshape a round's stored answers (the store's long table) into the tables the statistics take.

Every matrix here is **judges in rows, items (units) in columns**, as :mod:`labelstudy.agreement` expects,
with judges labelled by a unique display label and items in the solution's order. Codes stay as the stored
strings ("F1", "none", "3") for the sorting functions; :func:`numeric` maps them to integer positions of
an explicit domain for the coefficients that need numbers.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import pandas as pd

__all__ = ["judge_labels", "wide", "numeric", "shown_positions", "tidy_answers", "TIDY_COLUMNS"]

TIDY_COLUMNS = ["round", "task", "task_kind", "judge", "expertise", "item", "value", "comment",
                "answered_at", "revision", "seconds", "shown_position"]


def judge_labels(invitations: list[dict]) -> dict[int, str]:
    """judge id -> a unique label (the display name; a repeated name gets ``#id`` appended)."""
    names = [inv["display_name"] for inv in invitations]
    out = {}
    for inv in invitations:
        name = inv["display_name"]
        out[inv["judge_id"]] = name if names.count(name) == 1 else f"{name} #{inv['judge_id']}"
    return out


def wide(answers: pd.DataFrame, columns: Sequence[str], judges: Sequence[str]) -> pd.DataFrame:
    """Judges x ``columns`` table of stored values (strings; None where unanswered).

    ``answers`` is one task's slice of the long table with a ``judge_label`` column; keys not in
    ``columns`` (pile names, other facets) are ignored.
    """
    rows = answers[answers["item"].isin(list(columns)) & answers["value"].notna()]
    table = pd.DataFrame(None, index=pd.Index(list(judges), name="judge"), columns=pd.Index(list(columns),
                                                                                           name="item"),
                         dtype=object)
    for r in rows.itertuples(index=False):
        table.at[r.judge_label, r.item] = r.value
    return table


def numeric(table: pd.DataFrame, domain: Sequence[str]) -> pd.DataFrame:
    """The same table with each code replaced by its position in ``domain`` (0, 1, ...); NaN if missing.

    Ordered scales pass their codes in order ("1", "2", "3", "4"), so positions keep the order.
    """
    index = {str(code): float(i) for i, code in enumerate(domain)}
    values = np.full(table.shape, np.nan)
    for (r, c), v in np.ndenumerate(table.to_numpy(dtype=object)):
        if v is not None and not (isinstance(v, float) and np.isnan(v)):
            values[r, c] = index.get(str(v), np.nan)
    return pd.DataFrame(values, index=table.index, columns=table.columns)


def shown_positions(tasks: list[dict], solution, seed: int, judge_ids: Sequence[int]) -> dict:
    """(judge id, task id, answer key) -> the 1-based place at which that judge was shown the question.

    Recomputed from the round's stored seed with :func:`labelstudy.tasks.build_view`, exactly as the form
    laid it out, so order effects can be checked from the export.
    """
    from labelstudy.tasks import build_view

    out = {}
    for jid in judge_ids:
        for t in tasks:
            for pos, unit in enumerate(build_view(t, solution, seed=seed, judge_id=jid).units, start=1):
                out[(jid, t["id"], unit.key)] = pos
    return out


def tidy_answers(answers: pd.DataFrame, round_number: int, positions: dict | None = None) -> pd.DataFrame:
    """One row per judge x task x answer key, in the export's column order.

    ``shown_position`` is where the judge saw the question in its task (see :func:`shown_positions`).
    """
    positions = positions or {}
    shown = [positions.get((int(j), int(t), k)) for j, t, k in
             zip(answers["judge_id"], answers["task_id"], answers["item"])]
    out = pd.DataFrame({
        "round": round_number,
        "task": answers["task_position"].astype(int) + 1,
        "task_kind": answers["task_kind"],
        "judge": answers["judge_label"],
        "expertise": answers["expertise"].fillna(""),
        "item": answers["item"],
        "value": answers["value"],
        "comment": answers["comment"].fillna(""),
        "answered_at": answers["answered_at"],
        "revision": answers["revision"].astype(int),
        "seconds": pd.to_numeric(answers["seconds"], errors="coerce"),
        "shown_position": pd.array(shown, dtype="Int64"),
    }, columns=TIDY_COLUMNS)
    return out.sort_values(["task", "judge", "item"], kind="mergesort").reset_index(drop=True)
