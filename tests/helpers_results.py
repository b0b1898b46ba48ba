"""Build small projects with simulated judge answers for the results tests (seeded, reproducible).

The invented scenario: community orchard volunteers. Four factors of four items each; factors F3 and F4
are planted as a confusable pair (judges often swap them); item q04 is planted to cross-load (its second
loading .45) and judges split it between F1 and F2.
"""

from __future__ import annotations

import random
from pathlib import Path

from labelstudy.project import init_project
from labelstudy.solution import Factor, Item, Solution

PASSWORD = "correct horse battery"
FACTORS = [("F1", "Tree care", "Looking after the trees: pruning, watering, mulching."),
           ("F2", "Harvest work", "Picking, sorting and sharing the fruit."),
           ("F3", "Community ties", "Meeting neighbours and making friends through the orchard."),
           ("F4", "Belonging", "Feeling part of a group and welcomed by it.")]
TEXTS = {
    "F1": ["I prune the young trees in winter", "I water the saplings in dry weeks",
           "I spread mulch around the trunks", "I check the trees for pests"],
    "F2": ["I pick apples when they are ripe", "I sort the fruit by quality", "I carry crates to the shed",
           "I share the harvest with neighbours"],
    "F3": ["I have met new neighbours at the orchard", "I chat with other volunteers",
           "I made friends through the orchard", "I invite people to workdays"],
    "F4": ["I feel welcome at the orchard", "I feel part of the group", "The group accepts me as I am",
           "I belong with these volunteers"],
}
CONFUSABLE = ("F3", "F4")
CROSS_ITEM = "q04"


def solution(first_text: str | None = None) -> Solution:
    items = []
    n = 0
    ids = [f for f, _, _ in FACTORS]
    for fi, (fid, _, _) in enumerate(FACTORS):
        for k, text in enumerate(TEXTS[fid]):
            n += 1
            iid = f"q{n:02d}"
            loads = [0.05] * 4
            loads[fi] = 0.70 - 0.04 * k
            if iid == CROSS_ITEM:
                loads[1] = 0.45
            if n == 1 and first_text is not None:
                text = first_text
            items.append(Item(iid, text, tuple(zip(ids, loads)), None))
    return Solution(tuple(items), tuple(Factor(f, name, d) for f, name, d in FACTORS), None,
                    (("rotation", "oblimin"),), "test", ())


ALL_TASKS = [("label_match", {"show": "both"}), ("relevance", {}), ("essentiality", {}),
             ("open_sort", {"max_piles": 6}), ("definition_fit", {}),
             ("naming", {"candidates": {"F3": ["Neighbourliness"], "F4": ["Group spirit"]}})]


def _answer_lm(rng, item, intended, bad_judge):
    if bad_judge:
        return rng.choice(["F1", "F2", "F3", "F4", "none"])
    if item == CROSS_ITEM:
        return rng.choice(["F1", "F2"])
    if intended in CONFUSABLE and rng.random() < 0.4:
        return CONFUSABLE[1] if intended == CONFUSABLE[0] else CONFUSABLE[0]
    return intended if rng.random() < 0.92 else rng.choice(["F1", "F2", "F3", "F4", "none"])


def build(path: Path, *, n_judges: int = 8, seed: int = 7, tasks=None, first_text: str | None = None,
          comments: dict | None = None, bad_judge: bool = True, rounds: int = 1, submit: bool = True):
    """Create a project at ``path`` with ``rounds`` rounds of simulated answers; returns (project, store,
    study id, [round ids])."""
    project, _ = init_project(path, password=PASSWORD)
    store = project.store()
    sol = solution(first_text)
    sid = store.create_study("Orchard volunteering", sol)
    key = {it.id: max(it.loadings, key=lambda kv: abs(kv[1]))[0] for it in sol.items}
    rids = []
    judges = []
    for r in range(rounds):
        rid = store.create_round(sid, tasks=list(tasks or ALL_TASKS), seed=seed + r)
        if r == 0:
            invs = [store.add_judge(rid, f"Judge {j + 1}", expertise=["grower", "ecologist"][j % 2])
                    for j in range(n_judges)]
            judges = [inv["judge_id"] for inv in invs]
        else:
            for jid in judges:
                store.invite_existing(jid, rid)
        store.open_round(rid)
        rng = random.Random(seed * 100 + r)
        improve = r > 0
        for jn, jid in enumerate(judges):
            bad = bad_judge and jn == len(judges) - 1 and not improve
            rows = []
            for t in store.tasks(rid):
                kind, tid = t["kind"], t["id"]
                for it in sol.items:
                    f = key[it.id]
                    if kind == "label_match":
                        v = f if (improve and rng.random() < 0.95) else _answer_lm(rng, it.id, f, bad)
                        c = (comments or {}).get(it.id, "") if jn == 0 else ""
                        rows.append((tid, it.id, v, c, 1, round(rng.uniform(4, 12), 1)))
                    elif kind == "relevance":
                        good = it.id != CROSS_ITEM or improve
                        v = rng.choice("344" if good else "1223")
                        rows.append((tid, it.id, v, "", 1, None))
                    elif kind == "essentiality":
                        v = rng.choice("3332" if it.id != CROSS_ITEM else "12")
                        rows.append((tid, it.id, v, "", 1, None))
                    elif kind == "open_sort":
                        g = {"F1": "1", "F2": "2", "F3": "3", "F4": "3" if rng.random() < 0.5 else "4"}[f]
                        rows.append((tid, it.id, g, "", 1, None))
                    elif kind == "definition_fit":
                        for fid, _, _ in FACTORS:
                            hi = fid == f or (f in CONFUSABLE and fid in CONFUSABLE and rng.random() < 0.5)
                            v = str(rng.choice([4, 5]) if hi else rng.choice([1, 2]))
                            rows.append((tid, f"{it.id}|{fid}", v, "", 1, None))
                if kind == "open_sort":
                    for p, nm in (("1", "Tree jobs"), ("2", "Fruit picking"), ("3", "Social side"),
                                  ("4", "Feeling at home")):
                        rows.append((tid, f"pile:{p}", nm, "", 1, None))
                if kind == "naming":
                    for fid, name, _ in FACTORS:
                        alt = {"F3": "Neighbourliness", "F4": "Group spirit"}.get(fid, name)
                        rows.append((tid, f"{fid}|name", f"{name} work" if rng.random() < 0.5 else name, "",
                                     1, None))
                        rows.append((tid, f"{fid}|choice", rng.choice([name, alt]), "", 1, None))
                        clar = rng.choice("45") if fid not in CONFUSABLE else rng.choice("123")
                        rows.append((tid, f"{fid}|clarity", clar, "", 1, None))
            store.save_answers(jid, rid, rows)
            if submit:
                store.submit(jid, rid)
        store.close_round(rid)
        rids.append(rid)
    return project, store, sid, rids
