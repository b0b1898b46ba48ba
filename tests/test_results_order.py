"""The export says where each judge saw each question, reproduced from the round's stored seed."""

from __future__ import annotations

from helpers_results import build
from labelstudy.results import score_round
from labelstudy.tasks import build_view


def test_shown_position_matches_the_form_layout_and_differs_between_judges(tmp_path):
    project, store, sid, rids = build(tmp_path / "p", n_judges=6)
    rid = rids[0]
    res = score_round(store, rid)
    answers = res.tables["answers"]
    assert answers["shown_position"].notna().all()
    rnd, solution = store.get_round(rid), store.round_solution(rid)
    task = store.tasks(rid)[0]
    first = store.invitations(rid)[0]
    view = build_view(task, solution, seed=rnd["seed"], judge_id=first["judge_id"])   # what the form showed
    expected = {u.key: i for i, u in enumerate(view.units, start=1)}
    mine = answers[(answers["judge"] == first["display_name"]) & (answers["task"] == 1)]
    assert len(mine) > 0
    assert {r.item: int(r.shown_position) for r in mine.itertuples()} == {k: expected[k] for k in mine["item"]}
    orders = {tuple(g.sort_values("shown_position")["item"]) for _, g in answers[answers["task"] == 1]
              .groupby("judge")}
    assert len(orders) > 1, "items are shuffled per judge"
