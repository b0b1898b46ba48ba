"""Definition-fit ratings (Hinkin & Tracey 1999): repeated-measures F, Holm contrasts, verdicts."""

import gc
import math

import numpy as np
import pandas as pd
import pytest
from scipy.stats import ttest_rel
from statsmodels.stats.anova import AnovaRM
from statsmodels.stats.multitest import multipletests

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.deffit import definition_fit, holm, rm_anova


@pytest.fixture
def fast_multipletests(monkeypatch):
    """statsmodels' multipletests runs a full gc.collect() on every call (about 0.2 s inside a pytest run);
    switch that off for the reference loops. It does not touch the p-values."""
    monkeypatch.setattr(gc, "collect", lambda *args, **kwargs: 0)


def test_rm_anova_matches_statsmodels_anovarm_on_random_designs():
    # Reference: statsmodels.stats.anova.AnovaRM (one within factor, judges as subjects)
    rng = np.random.default_rng(21)
    for _ in range(200):
        n, k = int(rng.integers(2, 9)), int(rng.integers(2, 5))
        y = rng.integers(1, 6, size=(n, k)).astype(float) + rng.normal(0, 0.3, size=(n, k))
        F, df1, df2, p = rm_anova(y)
        long = pd.DataFrame([(s, c, y[s, c]) for s in range(n) for c in range(k)], columns=["s", "c", "v"])
        ref = AnovaRM(long, "v", "s", within=["c"]).fit().anova_table.iloc[0]
        assert F == pytest.approx(ref["F Value"], rel=1e-9, abs=1e-9)
        assert (df1, df2) == (ref["Num DF"], ref["Den DF"])
        assert p == pytest.approx(ref["Pr > F"], rel=1e-9, abs=1e-12)


def test_holm_matches_statsmodels_multipletests(fast_multipletests):
    # Reference: statsmodels.stats.multitest.multipletests(method="holm")
    rng = np.random.default_rng(4)
    for _ in range(250):
        p = rng.random(int(rng.integers(1, 8))) ** 2
        np.testing.assert_allclose(holm(p), multipletests(p, method="holm")[1], rtol=0, atol=1e-12)
    out = holm([0.01, np.nan, 0.02])
    assert math.isnan(out[1]) and out[0] == pytest.approx(0.02) and out[2] == pytest.approx(0.02)


def random_cube(rng, n_j=8, n_i=4, n_d=3, missing=0.1):
    cube = rng.integers(1, 6, size=(n_j, n_i, n_d)).astype(float)
    cube[rng.random(cube.shape) < missing] = np.nan
    return cube


def test_contrasts_match_scipy_paired_t_and_holm_on_random_designs(fast_multipletests):
    # Reference: scipy.stats.ttest_rel(alternative="greater") on complete cases; Holm via multipletests
    rng = np.random.default_rng(9)
    checked = 0
    for _ in range(70):
        cube = random_cube(rng)
        key = rng.integers(0, 3, size=4)
        res = definition_fit(cube, key=key)
        for i in range(4):
            y = cube[:, i, :]
            y = y[~np.isnan(y).any(axis=1)]
            row = res.table.loc[i]
            assert row["n"] == len(y)
            if len(y) < 2:
                continue
            others = [d for d in range(3) if d != key[i]]
            ps = []
            for d in others:
                diff = y[:, key[i]] - y[:, d]
                if np.std(diff) == 0:
                    ps = None
                    break
                ps.append(ttest_rel(y[:, key[i]], y[:, d], alternative="greater").pvalue)
            if ps is None:
                continue
            ref = multipletests(ps, method="holm")[1]
            got = [row[f"p_holm_{d}"] for d in others]
            np.testing.assert_allclose(got, ref, atol=1e-12)
            assert math.isnan(row[f"p_holm_{key[i]}"])
            checked += 1
    assert checked > 150


def planted_cube(n_j=10, seed=0):
    """3 items x 3 definitions: item 0 fits definition 0, item 1 fits 1, item 2 is rated as fitting 2."""
    rng = np.random.default_rng(seed)
    cube = rng.integers(1, 3, size=(n_j, 3, 3)).astype(float)
    cube[:, 0, 0] = rng.integers(4, 6, n_j)
    cube[:, 1, 1] = rng.integers(4, 6, n_j)
    cube[:, 2, 2] = rng.integers(4, 6, n_j)
    return cube


def test_verdicts_on_planted_designs():
    cube = planted_cube()
    res = definition_fit(cube, key=[0, 1, 0])
    t = res.table
    assert t["verdict"].tolist() == ["fits intended", "fits intended", "fits 2"]
    assert t["intended_highest"].tolist() == [True, True, False]
    assert (t["p_value"] < 0.001).all()
    assert len(res.contrasts) == 6
    assert res.to_dict()["alpha"] == 0.05
    assert repr(res) == "DefinitionFit(3 items: 2 fits intended, 1 fits 2; alpha=0.05)"


def test_unclear_when_intended_is_highest_but_not_significantly():
    cube = np.array([[3, 3, 1], [4, 3, 1], [2, 3, 1], [5, 4, 1]], dtype=float)[:, None, :]
    t = definition_fit(cube, key=[0]).table
    assert t.loc[0, "intended_highest"] and t.loc[0, "mean_0"] == 3.5
    assert t.loc[0, "p_holm_1"] > 0.05 and t.loc[0, "verdict"] == "unclear"


def test_perfectly_consistent_judges_fit_without_variance():
    cube = np.ones((5, 1, 3))
    cube[:, 0, 1] = 5.0
    t = definition_fit(cube, key=[1]).table
    assert t.loc[0, "F"] == math.inf and t.loc[0, "p_value"] == 0.0
    assert t.loc[0, "verdict"] == "fits intended"
    flat = definition_fit(np.ones((5, 1, 3)), key=[1]).table
    assert math.isnan(flat.loc[0, "F"]) and flat.loc[0, "verdict"] == "unclear"


def test_long_format_equals_array_and_reads_intended_column():
    cube = planted_cube(n_j=6, seed=3)
    rows = [{"judge": f"j{j}", "item": f"q{i}", "definition": f"D{d}", "value": cube[j, i, d],
             "intended": f"D{[0, 1, 0][i]}"}
            for j in range(6) for i in range(3) for d in range(3)]
    long = pd.DataFrame(rows)
    a = definition_fit(cube, key=[0, 1, 0]).table
    b = definition_fit(long).table
    assert b["intended"].tolist() == ["D0", "D1", "D0"]
    np.testing.assert_allclose(a["F"].to_numpy(), b["F"].to_numpy())
    np.testing.assert_allclose(a[["mean_0", "mean_1", "mean_2"]].to_numpy(),
                               b[["mean_D0", "mean_D1", "mean_D2"]].to_numpy())
    assert b["verdict"].tolist() == ["fits intended", "fits intended", "fits D2"]
    c = definition_fit(long.drop(columns="intended"), key={"q0": "D0", "q1": "D1", "q2": "D2"}).table
    assert c["verdict"].tolist() == ["fits intended"] * 3


def test_without_key_the_best_definition_is_tested():
    t = definition_fit(planted_cube()).table
    assert t["verdict"].tolist() == ["fits 0", "fits 1", "fits 2"]
    assert t["intended"].isna().all()


def test_missing_ratings_use_complete_cases():
    cube = planted_cube()
    cube[0, 0, 1] = np.nan
    cube[1:, 2, :] = np.nan
    res = definition_fit(cube, key=[0, 1, 2])
    assert res.table.loc[0, "n"] == 9
    assert res.table.loc[2, "n"] == 1 and res.table.loc[2, "verdict"] == "unclear"
    assert "item 2" in res.note


def test_errors():
    with pytest.raises(AgreementInputError, match="3-D"):
        definition_fit(np.ones((3, 3)))
    with pytest.raises(AgreementInputError, match="column"):
        definition_fit(pd.DataFrame({"judge": [1], "item": [1], "value": [3]}))
    long = pd.DataFrame({"judge": ["a", "a"], "item": ["q", "q"], "definition": ["D1", "D1"], "value": [1, 2]})
    with pytest.raises(AgreementInputError, match="more than once"):
        definition_fit(long)
    with pytest.raises(AgreementInputError, match="not rated"):
        definition_fit(np.ones((3, 2, 2)), key=[0, 5])
    with pytest.raises(AgreementInputError, match="2 definitions"):
        definition_fit(np.ones((3, 2, 1)), key=[0, 0])


# ------------------------------------------------------------------------------ audit regressions

def test_rm_anova_wrong_input_raises_agreement_input_error():
    # regression: a 1-D table escaped as "not enough values to unpack", text as a float ValueError, and a
    # table with a missing rating quietly gave NaN
    with pytest.raises(AgreementInputError, match="2-D"):
        rm_anova([1, 2, 3])
    with pytest.raises(AgreementInputError, match="number"):
        rm_anova([["a", "b"], ["c", "d"]])
    with pytest.raises(AgreementInputError, match="complete"):
        rm_anova([[1, 2], [np.nan, 3], [2, 3]])
