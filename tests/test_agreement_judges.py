"""Per-judge diagnostics: agreement with the key, leave-one-out kappa, response style, outlier rules."""

import math

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import cohen_kappa_score

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.judges import judge_diagnostics, nominal_kappa, robust_z

KEY = ["F1", "F2", "F3", "F1", "F2", "F3", "F1", "F2"]


def panel(n=8, seed=0, hit=0.85):
    rng = np.random.default_rng(seed)
    rows = []
    for _ in range(n):
        rows.append([k if rng.random() < hit else rng.choice(["F1", "F2", "F3", "none"]) for k in KEY])
    return pd.DataFrame(rows, index=[f"j{i}" for i in range(n)], columns=[f"q{i}" for i in range(8)])


def test_nominal_kappa_matches_sklearn():
    # Cohen (1960); reference sklearn.metrics.cohen_kappa_score with the full label set
    rng = np.random.default_rng(1)
    for _ in range(250):
        k, n = int(rng.integers(2, 5)), int(rng.integers(2, 30))
        x, y = rng.integers(0, k, n), rng.integers(0, k, n)
        if len(set(x) | set(y)) < 2:
            continue
        ref = cohen_kappa_score(x, y, labels=list(range(k)))
        got = nominal_kappa(x, y, k)
        if math.isnan(ref):
            assert math.isnan(got)
        else:
            assert got == pytest.approx(ref, abs=1e-12)
    assert math.isnan(nominal_kappa([0, 0], [0, 0], 2)) and math.isnan(nominal_kappa([-1], [0], 2))


def test_kappa_loo_and_hit_ratio_by_reference():
    a = panel()
    d = judge_diagnostics(a, KEY, none_code="none")
    dom = ["F1", "F2", "F3", "none"]
    for j in a.index:
        others = a.drop(index=j)
        cons, mine = [], []
        for item in a.columns:
            vc = others[item].value_counts()
            if (vc == vc.max()).sum() == 1:
                cons.append(vc.idxmax())
                mine.append(a.loc[j, item])
        ref = cohen_kappa_score(mine, cons, labels=dom)
        assert d.loc[j, "kappa_loo"] == pytest.approx(ref, abs=1e-12) or (
            math.isnan(ref) and math.isnan(d.loc[j, "kappa_loo"]))
        assert d.loc[j, "agreement_with_key"] == pytest.approx(np.mean(a.loc[j].to_numpy() == np.array(KEY)))
        assert d.loc[j, "none_share"] == pytest.approx(np.mean(a.loc[j] == "none"))


def test_planted_outliers_are_flagged_with_their_rule():
    a = panel(seed=2, hit=0.95)
    a.loc["rev"] = ["F2", "F3", "F1", "F2", "F3", "F1", "F2", "F3"]       # systematically off-key
    a.loc["nay"] = ["none"] * 6 + ["F1", "F2"]                              # mostly "none fits"
    d = judge_diagnostics(a, KEY, none_code="none")
    assert d.loc["rev", "outlier"]
    assert "kappa with the panel 2.5 robust SDs below the panel median" in d.loc["rev", "rule"]
    assert "agreement with the key" in d.loc["rev", "rule"]
    assert d.loc["nay", "outlier"] and "none fits" in d.loc["nay", "rule"]
    assert not d.loc[[f"j{i}" for i in range(8)], "outlier"].any()


def test_straightlining_and_speed_rules():
    rng = np.random.default_rng(3)
    ratings = pd.DataFrame(rng.integers(1, 5, size=(7, 10)), index=[f"j{i}" for i in range(7)], dtype=float)
    ratings.loc["j6"] = 4.0
    seconds = pd.DataFrame(rng.uniform(8, 14, size=(7, 10)), index=ratings.index)
    seconds.loc["j5"] = 1.0
    d = judge_diagnostics(ratings=ratings, seconds=seconds)
    assert d.loc["j6", "straightlining"] == 1.0 and d.loc["j6", "rating_sd"] == 0
    assert "the same rating for all 10 items rated" in d.loc["j6", "rule"]
    assert d.loc["j5", "median_seconds"] == 1.0 and "median time per item" in d.loc["j5", "rule"]
    assert d["outlier"].sum() == 2
    row = ratings.loc["j0"].to_numpy()
    assert d.loc["j0", "straightlining"] == pytest.approx(np.unique(row, return_counts=True)[1].max() / 10)
    assert d.loc["j0", "rating_sd"] == pytest.approx(row.std(ddof=1))
    assert math.isnan(d.loc["j0", "kappa_loo"])


def test_tables_align_on_judge_index():
    a = panel(n=4)
    secs = pd.DataFrame(np.full((3, 8), 10.0), index=["j3", "j1", "zed"])
    d = judge_diagnostics(a, KEY, seconds=secs)
    assert set(d.index) == {"j0", "j1", "j2", "j3", "zed"}
    assert math.isnan(d.loc["zed", "kappa_loo"]) and d.loc["zed", "median_seconds"] == 10
    with pytest.raises(AgreementInputError, match="different numbers of judges"):
        judge_diagnostics(a.to_numpy(), KEY, seconds=np.ones((3, 8)))


def test_robust_z_fallback_and_floor():
    # Iglewicz & Hoaglin (1993) modified z: MAD scaled by 1.4826; mean absolute deviation when MAD = 0
    z = robust_z([1, 1, 1, 1, 0.5])
    assert z[-1] == pytest.approx((0.5 - 1) / (1.253314 * 0.1))
    assert (robust_z([2, 2, 2]) == 0).all()
    assert robust_z([1, 1, 1, 1, 0.99], floor=0.05)[-1] == pytest.approx(-0.2)


def test_errors():
    with pytest.raises(AgreementInputError):
        judge_diagnostics()
    with pytest.raises(AgreementInputError, match="none_code"):
        judge_diagnostics(panel(), KEY, none_code="nothing")
    with pytest.raises(AgreementInputError, match="negative"):
        judge_diagnostics(seconds=[[1, -2]])
    with pytest.raises(AgreementInputError):
        judge_diagnostics(key=KEY, ratings=[[1, 2]])


# ------------------------------------------------------------------------------ audit regressions

def test_all_missing_assignments_give_nan_not_a_crash():
    # regression: a panel without a single answer used to raise a numpy "zero-size array" ValueError
    d = judge_diagnostics([[np.nan, np.nan], [np.nan, np.nan], [np.nan, np.nan]])
    assert d["n_answers"].tolist() == [0, 0, 0] and d["kappa_loo"].isna().all()
    assert not d["outlier"].any()


def test_nominal_kappa_refuses_codes_outside_its_categories():
    # regression: a code >= k used to escape as a numpy matmul ValueError
    with pytest.raises(AgreementInputError, match="categories run 0..1"):
        nominal_kappa([0, 3], [0, 1], 2)
    with pytest.raises(AgreementInputError, match="equal length"):
        nominal_kappa([0, 1, 1], [0, 1], 2)
