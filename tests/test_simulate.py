"""The simulated judge panel of the community-orchard sample study (labelstudy.simulate)."""

from __future__ import annotations

import itertools
from collections import Counter
from pathlib import Path

import pandas as pd
import pytest

from labelstudy.errors import FormInputError, LabelstudyError
from labelstudy.simulate import (ORCHARD_CANDIDATES, export_panel, orchard_panel, simulate_panel)
from labelstudy.solution import load_solution
from labelstudy.tasks import build_view, check_answer

ROOT = Path(__file__).resolve().parent.parent
SAMPLE = ROOT / "sample_studies" / "community_orchards"
MAX_PILES = 8
CONFIGS = [("open_sort", {"max_piles": MAX_PILES}), ("label_match", {"show": "both"}), ("relevance", {}),
           ("essentiality", {}), ("definition_fit", {"shuffle_options": True}),
           ("naming", {"candidates": ORCHARD_CANDIDATES})]
# Planted in sample_studies/community_orchards/solution/make_files.py (see its docstring).
PAIR = ("F2", "F4")
CROSS = "O14"


@pytest.fixture(scope="module")
def solution():
    return load_solution(SAMPLE / "solution" / "orchard_solution.xlsx")


@pytest.fixture(scope="module")
def panel(solution):
    return orchard_panel(solution, max_piles=MAX_PILES)


def _intended(solution) -> dict[str, str]:
    """Independent of the package: the factor of the largest absolute loading, by plain max()."""
    return {it.id: max(it.loadings, key=lambda p: abs(p[1]))[0] for it in solution.items}


def _label_match(panel) -> pd.DataFrame:
    a = panel.answers
    return a[a["task_kind"] == "label_match"]


def test_same_seed_gives_identical_answers(solution, panel):
    again = orchard_panel(solution, max_piles=MAX_PILES)
    pd.testing.assert_frame_equal(panel.answers, again.answers)
    assert panel.judges == again.judges


def test_different_seed_gives_different_answers(solution, panel):
    other = orchard_panel(solution, seed=7, max_piles=MAX_PILES)
    assert len(other.answers) > 0
    merged = panel.answers.merge(other.answers, on=["judge", "task_kind", "key"], how="inner")
    assert (merged["value_x"] != merged["value_y"]).sum() > 50


def test_every_answer_is_valid_and_every_required_question_answered(solution, panel):
    tasks = [{"id": 100 + pos, "position": pos, "kind": kind, "config": cfg}
             for pos, (kind, cfg) in enumerate(CONFIGS)]
    for j, judge in enumerate(panel.judges, start=1):
        views = {t["kind"]: build_view(t, solution, seed=99, judge_id=j) for t in tasks}
        mine = panel.for_judge(judge.code)
        for row in mine.itertuples(index=False):
            try:
                value, _ = check_answer(views[row.task_kind], row.key, row.value, row.comment)
            except FormInputError as exc:  # pragma: no cover - the failure message is the point
                pytest.fail(f"{judge.code} {row.task_kind} {row.key}={row.value!r}: {exc}")
            assert value is not None
            assert row.seconds > 0
        for kind, view in views.items():
            answered = set(mine.loc[mine["task_kind"] == kind, "key"])
            assert set(view.required_keys) <= answered, (judge.code, kind)
    # long format: one row per judge x task kind x key
    assert not panel.answers.duplicated(["judge", "task_kind", "key"]).any()


def test_judges_are_invented_and_one_is_the_outlier(panel):
    assert len(panel.judges) == 12
    assert len({j.code for j in panel.judges}) == 12
    assert sum(j.outlier for j in panel.judges) == 1
    assert all(j.expertise for j in panel.judges)


def test_planted_pair_is_the_most_confused_in_label_matching(solution, panel):
    key = _intended(solution)
    swaps = Counter()
    for row in _label_match(panel).itertuples(index=False):
        target = key[row.key]
        if row.value not in (target, "none"):
            swaps[frozenset((target, row.value))] += 1
    planted = swaps[frozenset(PAIR)]
    others = [n for pair, n in swaps.items() if pair != frozenset(PAIR)]
    assert planted > 2 * max(others), swaps


def test_open_sort_merges_the_planted_pair_most_often(solution, panel):
    key = _intended(solution)
    a = panel.answers
    sort = a[(a["task_kind"] == "open_sort") & ~a["key"].str.startswith("pile:")]
    fids = sorted(set(key.values()))
    merged = Counter()
    for code, rows in sort.groupby("judge"):
        modal = {}
        for f in fids:
            piles = Counter(rows.loc[rows["key"].map(key) == f, "value"])
            modal[f] = piles.most_common(1)[0][0]
        for f, g in itertools.combinations(fids, 2):
            merged[(f, g)] += modal[f] == modal[g]
    planted = merged[PAIR]
    assert planted >= 5, merged
    assert all(planted > n for pair, n in merged.items() if pair != PAIR), merged


def test_definition_fit_of_pair_items_under_the_partner_is_close(solution, panel):
    key = _intended(solution)
    a = panel.answers
    careful = {j.code for j in panel.judges if not j.outlier}
    fit = a[(a["task_kind"] == "definition_fit") & a["judge"].isin(careful)].copy()
    fit[["item", "factor"]] = fit["key"].str.split("|", expand=True)
    fit["rating"] = fit["value"].astype(int)
    fit = fit[fit["item"] != CROSS]

    def mean(of, under):
        sel = fit[(fit["item"].map(key) == of) & (fit["factor"] == under)]
        return sel["rating"].mean()

    assert abs(mean("F2", "F2") - mean("F2", "F4")) < 1.0
    assert abs(mean("F4", "F4") - mean("F4", "F2")) < 1.0
    assert mean("F1", "F1") - mean("F1", "F3") > 2.0
    assert mean("F3", "F3") - mean("F3", "F2") > 2.0


def test_cross_loading_item_is_misplaced_and_rated_least_relevant(solution, panel):
    key = _intended(solution)
    lm = _label_match(panel)
    hit = (lm["value"] == lm["key"].map(key)).groupby(lm["key"]).mean()
    a = panel.answers
    rel = a[a["task_kind"] == "relevance"]
    relevant = (rel["value"].astype(int) >= 3).groupby(rel["key"]).mean()
    assert relevant.idxmin() == CROSS
    assert relevant[CROSS] < 0.78     # Lynn's (1986) I-CVI cut-off for six or more judges
    plain = [i for i, f in key.items() if f not in PAIR and i != CROSS]
    assert hit[CROSS] < hit[plain].mean() - 0.3
    assert relevant[plain].mean() > 0.85
    assert (a[(a["task_kind"] == "label_match") & (a["key"] == CROSS)]["comment"] != "").sum() >= 2


def test_plain_items_are_placed_correctly_about_nine_times_in_ten(solution, panel):
    key = _intended(solution)
    lm = _label_match(panel)
    careful = {j.code for j in panel.judges if not j.outlier}
    plain = [i for i, f in key.items() if f not in PAIR and i != CROSS]
    sel = lm[lm["judge"].isin(careful) & lm["key"].isin(plain)]
    rate = (sel["value"] == sel["key"].map(key)).mean()
    assert 0.82 <= rate <= 0.97, rate


def test_outlier_has_the_lowest_agreement_with_the_key(solution, panel):
    key = _intended(solution)
    lm = _label_match(panel)
    agreement = (lm["value"] == lm["key"].map(key)).groupby(lm["judge"]).mean()
    nones = (lm["value"] == "none").groupby(lm["judge"]).sum()
    outlier = panel.outlier.code
    assert agreement.idxmin() == outlier
    assert agreement.drop(outlier).min() - agreement[outlier] > 0.3
    assert nones.idxmax() == outlier and nones[outlier] >= 5


def test_bad_arguments_are_refused_with_our_error(solution):
    with pytest.raises(LabelstudyError, match="confusable"):
        simulate_panel(solution, confusable=("F2", "F9"))
    with pytest.raises(LabelstudyError, match="O99"):
        simulate_panel(solution, cross_loading=("O99",))
    with pytest.raises(LabelstudyError, match="n_judges"):
        simulate_panel(solution, n_judges=40)


def test_the_shipped_panel_csv_is_what_the_code_generates(panel, tmp_path):
    shipped = SAMPLE / "panel"
    judges, answers = export_panel(panel, tmp_path)
    assert (shipped / "judges.csv").read_text(encoding="utf-8") == judges.read_text(encoding="utf-8")
    assert (shipped / "answers.csv").read_text(encoding="utf-8") == answers.read_text(encoding="utf-8")
