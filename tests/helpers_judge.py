"""Builders for the judge-side web tests: a small invented solution, a project and an open round.

The scenario is invented: why people volunteer in a community orchard (three factors, nine statements).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

from labelstudy.project import init_project
from labelstudy.solution import Factor, Item, Solution

PASSWORD = "correct horse battery"

FACTORS = (
    Factor("F1", "Belonging", "Feeling part of a group of neighbours who share the work."),
    Factor("F2", "Learning", "Gaining practical skills in pruning, grafting and tending fruit trees."),
    Factor("F3", "Care for the land", "Looking after the soil, the trees and the wildlife of the orchard."),
)

_ITEMS = (
    ("B1", "I enjoy the chats during the harvest days.", 0.71, 0.10, 0.05),
    ("B2", "The orchard is where I met most of my friends here.", 0.66, 0.02, 0.12),
    ("B3", "I feel I belong to the volunteer group.", 0.74, 0.08, 0.01),
    ("L1", "I come to learn how to prune apple trees.", 0.05, 0.69, 0.11),
    ("L2", "Grafting workshops are the best part for me.", 0.12, 0.72, 0.03),
    ("L3", "I want to take new skills home to my own garden.", 0.09, 0.58, 0.20),
    ("C1", "Protecting the hedgerow birds matters to me.", 0.04, 0.10, 0.68),
    ("C2", "I care about keeping the soil healthy without chemicals.", 0.11, 0.06, 0.73),
    ("C3", "Leaving the orchard better than I found it is why I come.", 0.15, 0.13, 0.61),
)


def orchard_solution(n_items: int = 9) -> Solution:
    """Nine statements loading cleanly on three factors (fewer with ``n_items``)."""
    items = tuple(Item(id=i, text=t, loadings=(("F1", a), ("F2", b), ("F3", c)), reverse_keyed=False)
                  for i, t, a, b, c in _ITEMS[:n_items])
    phi = ((1.0, 0.2, 0.1), (0.2, 1.0, 0.15), (0.1, 0.15, 1.0))
    return Solution(items=items, factors=FACTORS, phi=phi, meta=(("extraction", "minres"),),
                    source="orchard-test", notes=())


DEFAULT_TASKS = [("open_sort", {"max_piles": 4}), ("label_match", {"show": "both"}), ("relevance", {})]
ALL_KINDS = [("open_sort", {"max_piles": 4}), ("label_match", {"show": "both"}), ("relevance", {}),
             ("essentiality", {}), ("definition_fit", {}),
             ("naming", {"candidates": {"F1": ["Community"], "F2": ["Skills"], "F3": ["Stewardship"]}})]


@dataclass
class Built:
    project: object
    store: object
    study_id: int
    round_id: int
    token: str
    judge_id: int
    path: Path


def build_round(tmp_path: Path, *, tasks=None, n_items: int = 9, deadline: str | None = None,
                judges: int = 1, open_round: bool = True) -> Built:
    """A project with one study, one round holding ``tasks`` and one invited judge ("Judge A")."""
    path = Path(tmp_path) / "p"
    project, _ = init_project(path, password=PASSWORD)
    store = project.store()
    sid = store.create_study("Why we volunteer at the orchard", orchard_solution(n_items))
    rid = store.create_round(sid, tasks=list(tasks or DEFAULT_TASKS), title="Round 1",
                             instructions="Read each statement and answer quickly.\n\nThere are no wrong answers.",
                             consent="Your answers are kept with a code, not your name.", deadline=deadline,
                             seed=1234)
    if open_round:
        store.open_round(rid)
    inv = store.add_judge(rid, "Judge A", email="a@example.org", expertise="volunteering")
    for k in range(1, judges):
        store.add_judge(rid, f"Judge {chr(65 + k)}")
    return Built(project, store, sid, rid, inv["token"], inv["judge_id"], path)


def csrf_from(html: str) -> str:
    """The judge form token written into a page (hidden field)."""
    m = re.search(r'name="csrf_token" value="([0-9a-f]{64})"', html)
    assert m, "no judge csrf token in the page"
    return m.group(1)


def make_app(path: Path, **config):
    """The real app for ``path`` with TESTING on (CSRF stays on unless a test turns it off)."""
    from labelstudy.web import create_app

    return create_app(path, {"TESTING": True, **config})
