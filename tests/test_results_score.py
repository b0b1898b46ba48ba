"""Scoring a round: every number traced to labelstudy.agreement, verdicts, rules and the cache."""

from __future__ import annotations

import json

import numpy as np
import pytest

from helpers_results import CONFUSABLE, CROSS_ITEM, build
from labelstudy.agreement.alpha import krippendorff_alpha
from labelstudy.agreement.cvi import item_cvi, lawshe_cvr
from labelstudy.agreement.gwet import gwet_ac1
from labelstudy.agreement.itemsort import hit_ratios, item_sort
from labelstudy.errors import LabelstudyError
from labelstudy.results import RulesError, clear_cache, default_rules, load_rules, parse_rules, score_round

DOMAIN = ["F1", "F2", "F3", "F4", "none"]


@pytest.fixture(scope="module")
def scored(tmp_path_factory):
    project, store, sid, rids = build(tmp_path_factory.mktemp("score") / "p")
    return project, store, rids[0], score_round(store, rids[0])


def _matrix(store, rid, kind):
    """Judges x items of one task, built here straight from the store (independent of the results code)."""
    a = store.answers(rid)
    a = a[(a["task_kind"] == kind) & ~a["item"].str.contains(r"[|:]")]
    return a.pivot(index="judge", columns="item", values="value")


def test_alpha_and_ac1_traced_to_the_statistics_package(scored):
    _, store, rid, res = scored
    wide = _matrix(store, rid, "label_match")
    codes = wide.apply(lambda col: col.map({c: i for i, c in enumerate(DOMAIN)})).astype(float)
    seed = store.get_round(rid)["seed"]
    direct = krippendorff_alpha(codes, "nominal", domain=range(5), n_boot=1000, seed=seed)
    ag = res.tables["agreement"]
    row = ag[(ag["task_kind"] == "label_match") & ag["coefficient"].str.startswith("Krippendorff")].iloc[0]
    assert row["value"] == pytest.approx(direct.alpha, abs=1e-12)
    assert row["ci_low"] == pytest.approx(direct.ci_low, abs=1e-12)
    assert row["ci_high"] == pytest.approx(direct.ci_high, abs=1e-12)
    assert "unit bootstrap, 1000 replicates" in row["method"]
    ac1 = ag[(ag["task_kind"] == "label_match") & (ag["coefficient"] == "Gwet's AC1")].iloc[0]
    assert ac1["value"] == pytest.approx(gwet_ac1(codes, domain=range(5)).coefficient, abs=1e-12)
    rel = _matrix(store, rid, "relevance").astype(float)
    r = ag[(ag["task_kind"] == "relevance") & ag["coefficient"].str.startswith("Krippendorff")].iloc[0]
    assert r["value"] == pytest.approx(krippendorff_alpha(rel, "ordinal", domain=[1, 2, 3, 4]).alpha, abs=1e-12)


def test_item_indices_traced(scored):
    _, store, rid, res = scored
    wide = _matrix(store, rid, "label_match")
    sol = store.round_solution(rid)
    key = {it.id: max(it.loadings, key=lambda kv: abs(kv[1]))[0] for it in sol.items}
    items = res.tables["items"].set_index("item")
    hits = hit_ratios(wide, key, domain=DOMAIN).per_item
    sort = item_sort(wide, key, domain=DOMAIN, none_code="none")
    icvi = item_cvi(_matrix(store, rid, "relevance").astype(float))
    cvr = lawshe_cvr(_matrix(store, rid, "essentiality").astype(float))
    for iid in items.index:
        assert items.loc[iid, "hit_ratio"] == pytest.approx(hits[iid])
        assert items.loc[iid, "csv"] == pytest.approx(sort.loc[iid, "csv"])
        assert items.loc[iid, "csv_p"] == pytest.approx(sort.loc[iid, "p_value"])
        assert items.loc[iid, "i_cvi"] == pytest.approx(icvi[iid])
        assert items.loc[iid, "cvr"] == pytest.approx(cvr.loc[iid, "cvr"])


def test_planted_problems_get_their_verdicts(scored):
    _, _, _, res = scored
    items = res.tables["items"].set_index("item")
    assert items.loc[CROSS_ITEM, "verdict"] in ("revise", "drop")
    assert "cross_loading" in items.loc[CROSS_ITEM, "flags"]
    labels = res.tables["labels"].set_index("factor")
    a, b = CONFUSABLE
    assert labels.loc[a, "verdict"] == f"overlapping with {b}"
    assert labels.loc[b, "verdict"] == f"overlapping with {a}"
    assert labels.loc["F1", "verdict"] == "clear"
    assert "0.25" in labels.loc[a, "verdict_rule"]


def test_outlier_judge_and_sensitivity(scored):
    _, store, rid, res = scored
    judges = res.tables["judges"].set_index("judge")
    assert judges.loc["Judge 8", "outlier"]                     # planted random answerer
    sens = res.tables["sensitivity"].set_index("statistic")
    wide = _matrix(store, rid, "label_match").drop(index="Judge 8")
    codes = wide.apply(lambda col: col.map({c: i for i, c in enumerate(DOMAIN)})).astype(float)
    stat = "Krippendorff's alpha (nominal), label matching"
    assert sens.loc[stat, "without_flagged"] == pytest.approx(
        krippendorff_alpha(codes, "nominal", domain=range(5)).alpha)
    assert sens.loc[stat, "without_flagged"] > sens.loc[stat, "all_judges"]


def test_prevalence_caution_where_ac1_and_alpha_diverge(scored):
    _, _, _, res = scored
    ag = res.tables["agreement"]
    for task in ag["task"].unique():
        rows = ag[ag["task"] == task].set_index("coefficient")["value"]
        ac1 = rows.get("Gwet's AC1", np.nan)
        alpha = rows[[c for c in rows.index if c.startswith("Krippendorff")]].min()
        if np.isfinite(ac1) and np.isfinite(alpha) and ac1 - alpha > 0.20:
            assert any(c.startswith(task) and "kappa paradox" in c for c in res.cautions)


def test_cache_hits_and_invalidates(tmp_path):
    project, store, sid, rids = build(tmp_path / "p", n_judges=4, tasks=[("label_match", {})], bad_judge=False,
                                      submit=False)
    first = score_round(store, rids[0])
    assert score_round(store, rids[0]) is first
    store.reopen_round(rids[0])
    jid = store.invitations(rids[0])[0]["judge_id"]
    tid = store.tasks(rids[0])[0]["id"]
    store.save_answer(jid, rids[0], tid, "q01", "none", revision=2)
    again = score_round(store, rids[0])
    assert again is not first
    ans = again.tables["answers"]
    assert ans[(ans["judge"] == "Judge 1") & (ans["item"] == "q01")]["value"].tolist() == ["none"]


def test_fleiss_refused_with_unequal_judges_and_says_why(tmp_path):
    project, store, sid, rids = build(tmp_path / "p", n_judges=4, tasks=[("label_match", {})], submit=False)
    store.reopen_round(rids[0])
    jid = store.invitations(rids[0])[0]["judge_id"]
    tid = store.tasks(rids[0])[0]["id"]
    store.save_answer(jid, rids[0], tid, "q02", None, revision=2)       # one item now has 3 judges
    res = score_round(store, rids[0])
    ag = res.tables["agreement"].set_index("coefficient")
    assert np.isnan(ag.loc["Fleiss' kappa", "value"])
    assert "same number of answers" in ag.loc["Fleiss' kappa", "note"]
    assert np.isfinite(ag.loc["Krippendorff's alpha (nominal)", "value"])


def test_rules_file_written_on_first_use_and_edits_change_a_verdict(tmp_path):
    project, store, sid, rids = build(tmp_path / "p", n_judges=8, tasks=[("label_match", {})])
    res = score_round(store, rids[0])
    assert (project.path / "rules.json").exists()
    labels = res.tables["labels"].set_index("factor")
    assert labels.loc["F3", "verdict"].startswith("overlapping")
    doc = json.loads((project.path / "rules.json").read_text())
    doc["rules"]["overlap_confusion_min"]["value"] = 0.95
    (project.path / "rules.json").write_text(json.dumps(doc))
    res2 = score_round(store, rids[0])
    labels2 = res2.tables["labels"].set_index("factor")
    assert not labels2.loc["F3", "verdict"].startswith("overlapping")
    assert res2.tables["rules"].set_index("rule").loc["overlap_confusion_min", "value"] == 0.95


@pytest.mark.parametrize("edit, words", [
    ({"overlap_min": 0.3}, "unknown rule 'overlap_min'"),
    ({"item_hit_min": 1.5}, "rule 'item_hit_min' must lie between 0 and 1"),
    ({"item_hit_min": "high"}, "rule 'item_hit_min' must be a number"),
    ({"alpha_n_boot": 10.5}, "rule 'alpha_n_boot' must be a whole number"),
    ({"revise_solution_flags": ["sideways"]}, "unknown flag(s) sideways"),
])
def test_bad_rules_give_a_clear_error_naming_the_key(tmp_path, edit, words):
    doc = {"rules": {k: {"value": v} for k, v in edit.items()}}
    path = tmp_path / "rules.json"
    path.write_text(json.dumps(doc))
    with pytest.raises(RulesError) as err:
        load_rules(tmp_path)
    assert words in str(err.value)
    assert str(path) in str(err.value)
    assert isinstance(err.value, LabelstudyError)


def test_rules_not_json_and_defaults():
    with pytest.raises(RulesError, match="not valid JSON"):
        parse_rules("{oops", where="x.json")
    r = default_rules()
    # Polit & Beck (2006), Lynn (1986): .78 with six or more judges, 1.00 with five or fewer.
    assert r["icvi_min_large_panel"] == 0.78 and r["icvi_min_small_panel"] == 1.0
    assert r["icvi_small_panel_max"] == 5
    assert r["scvi_ave_min"] == 0.90                           # Polit & Beck (2006) [memory for wording]
    assert set(r.table()["source"].astype(bool)) == {True}     # every rule names its source


def test_no_answers_scores_without_error(tmp_path):
    from labelstudy.project import init_project
    from helpers_results import solution
    project, _ = init_project(tmp_path / "p", password="correct horse battery")
    store = project.store()
    sid = store.create_study("Empty", solution())
    rid = store.create_round(sid, tasks=[("label_match", {}), ("relevance", {})], seed=1)
    res = score_round(store, rid)
    assert res.meta["n_judges_answered"] == 0
    assert any("nothing to score" in n for n in res.notes)
    items = res.tables["items"].set_index("item")
    assert items.loc[CROSS_ITEM, "verdict"] == "revise"           # the solution's own flag still counts
    assert items.loc[CROSS_ITEM, "verdict_rule"] == "solution flag cross_loading"
    assert set(items.drop(index=CROSS_ITEM)["verdict"]) == {"keep"}
    clear_cache()
