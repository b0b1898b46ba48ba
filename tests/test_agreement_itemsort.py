"""Closed item-sort: Anderson & Gerbing indices, hit ratios, confusion, label ambiguity."""

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st
from scipy.stats import binomtest

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.itemsort import (confusion, critical_count, hit_ratios, item_sort,
                                           label_ambiguity)

DOMAIN = ["F1", "F2", "F3", "none"]


def example_20():
    # Anderson & Gerbing (1991) indices; example counts 14/4/2/0 from our METHODS notes [computed]
    return pd.DataFrame({"q1": ["F1"] * 14 + ["F2"] * 4 + ["none"] * 2}, index=[f"j{i}" for i in range(20)])


def test_psa_csv_worked_example():
    t = item_sort(example_20(), {"q1": "F1"}, domain=DOMAIN)
    row = t.loc["q1"]
    assert row["psa"] == pytest.approx(0.70) and row["csv"] == pytest.approx(0.50)
    assert (row["n"], row["n_c"], row["n_o"], row["rival"]) == (20, 14, 4, "F2")
    assert row["critical"] == 15 and not row["significant"]   # 14 < 15 needed at N = 20
    assert t.attrs["p0"] == 0.5


def test_same_example_with_numeric_codes():
    a = example_20()["q1"].map({"F1": 1, "F2": 2, "none": 9}).to_frame()
    t = item_sort(a, [1], domain=[1, 2, 3, 9])
    assert t.loc["q1", "psa"] == pytest.approx(0.70) and t.loc["q1", "rival"] == 2
    t = item_sort(a.astype(float), [1.0], domain=[1, 2, 3, 9])
    assert t.loc["q1", "csv"] == pytest.approx(0.50)


# Critical n_c at p0 = .5 (exact one-sided binomial), from our METHODS notes [computed]
@pytest.mark.parametrize("n, crit", [(10, 9), (20, 15), (30, 20)])
def test_critical_counts(n, crit):
    assert critical_count(n, p0=0.5) == crit
    assert binomtest(crit, n, 0.5, alternative="greater").pvalue < 0.05
    assert binomtest(crit - 1, n, 0.5, alternative="greater").pvalue >= 0.05


def test_none_code_is_not_a_rival():
    a = pd.DataFrame({"q1": ["F1"] * 5 + ["none"] * 4 + ["F2"]})
    assert item_sort(a, ["F1"], domain=DOMAIN).loc["q1", "rival"] == "none"
    t = item_sort(a, ["F1"], domain=DOMAIN, none_code="none")
    assert t.loc["q1", "rival"] == "F2" and t.loc["q1", "n_o"] == 1


def random_design(rng, k):
    n_j, n_i = rng.integers(1, 25), rng.integers(1, 8)
    codes = rng.integers(0, k, size=(n_j, n_i)).astype(float)
    codes[rng.random(codes.shape) < 0.2] = np.nan
    key = rng.integers(0, k, size=n_i)
    return codes, key


def test_p_values_match_scipy_binomtest_on_random_designs():
    # scipy.stats.binomtest(alternative="greater") as the reference, p0 = .5 and p0 = 1/k
    rng = np.random.default_rng(11)
    checked = 0
    for _ in range(250):
        k = int(rng.integers(2, 6))
        codes, key = random_design(rng, k)
        for p0 in (0.5, "1/k"):
            t = item_sort(codes, key, domain=range(k), p0=p0)
            prob = 0.5 if p0 == 0.5 else 1 / k
            assert t.attrs["p0"] == pytest.approx(prob)
            for i in range(codes.shape[1]):
                col = codes[:, i][~np.isnan(codes[:, i])]
                n, n_c = len(col), int((col == key[i]).sum())
                if n == 0:
                    assert math.isnan(t.loc[i, "p_value"])
                    continue
                ref = binomtest(n_c, n, prob, alternative="greater").pvalue
                assert t.loc[i, "p_value"] == pytest.approx(ref, abs=1e-12)
                assert t.loc[i, "significant"] == (ref < 0.05)
                others = np.bincount(col.astype(int), minlength=k)
                others[key[i]] = 0
                assert t.loc[i, "csv"] == pytest.approx((n_c - others.max()) / n)
                checked += 1
    assert checked > 400


def test_item_without_answers_is_nan_with_note():
    a = pd.DataFrame({"q1": ["F1", "F2"], "q2": [None, np.nan]})
    t = item_sort(a, ["F1", "F2"], domain=DOMAIN)
    assert math.isnan(t.loc["q2", "psa"]) and math.isnan(t.loc["q2", "p_value"])
    assert "q2" in t.attrs["note"] and pd.isna(t.loc["q2", "critical"])


def test_hit_ratios_by_hand():
    # Moore & Benbasat (1991) hit ratio = correct placements / all placements
    a = pd.DataFrame({"q1": ["A", "A", "B", None], "q2": ["A", "A", "A", "A"], "q3": ["B", "B", "B", "none"]})
    r = hit_ratios(a, {"q1": "A", "q2": "A", "q3": "B"})
    assert r.per_item.tolist() == pytest.approx([2 / 3, 1.0, 0.75])
    assert r.per_factor["A"] == pytest.approx(6 / 7) and r.per_factor["B"] == pytest.approx(0.75)
    assert r.overall == pytest.approx(9 / 11) and r.n_placements == 11
    d = r.to_dict()
    assert d["overall"] == pytest.approx(9 / 11) and d["per_item"]["q3"] == 0.75
    assert item_sort(a, {"q1": "A", "q2": "A", "q3": "B"})["psa"].tolist() == pytest.approx(
        r.per_item.tolist())


def test_confusion_and_label_ambiguity_by_hand():
    a = pd.DataFrame({"q1": ["A", "A", "B", "A"], "q2": ["A", "B", "A", "A"],
                      "q3": ["B", "B", "none", "B"], "q4": ["B", "A", "B", "B"]})
    key = ["A", "A", "B", "B"]
    c = confusion(a, key, domain=["A", "B", "C", "none"])
    assert c.loc["A"].tolist() == [6, 2, 0, 0] and c.loc["B"].tolist() == [1, 6, 0, 1]
    assert list(c.columns) == ["A", "B", "C", "none"]
    t = label_ambiguity(a, key, domain=["A", "B", "C", "none"])
    assert t.loc["A", "hit_rate"] == pytest.approx(6 / 8)
    assert t.loc["A", "attraction"] == pytest.approx(1 / 8)
    assert t.loc["B", "attraction"] == pytest.approx(2 / 8)
    assert t.loc["A", "most_confused"] == "B"
    assert t.loc["A", "confusion_rate"] == pytest.approx(3 / 16) == t.loc["B", "confusion_rate"]
    p = np.array([6, 2]) / 8
    assert t.loc["A", "entropy"] == pytest.approx(-(p * np.log(p)).sum() / np.log(4))
    p = np.array([1, 6, 1]) / 8
    assert t.loc["B", "entropy"] == pytest.approx(-(p * np.log(p)).sum() / np.log(4))


def test_perfect_agreement():
    a = pd.DataFrame([["F1", "F2", "F3", "F1"]] * 6)
    key = ["F1", "F2", "F3", "F1"]
    t = item_sort(a, key, domain=DOMAIN)
    assert (t["psa"] == 1).all() and (t["csv"] == 1).all() and t["rival"].isna().all()
    assert hit_ratios(a, key).overall == 1.0
    amb = label_ambiguity(a, key, domain=DOMAIN)
    assert (amb["entropy"] == 0).all() and (amb["attraction"] == 0).all()


def test_wrong_input_raises_readable_errors():
    a = pd.DataFrame({"q1": ["F1", "F9"]})
    with pytest.raises(AgreementInputError, match="F9"):
        item_sort(a, ["F1"], domain=DOMAIN)
    with pytest.raises(AgreementInputError, match="F7"):
        item_sort(pd.DataFrame({"q1": ["F1"]}), ["F7"], domain=DOMAIN)
    with pytest.raises(AgreementInputError, match="2 intended"):
        item_sort(a, ["F1", "F2"])
    with pytest.raises(AgreementInputError, match="q1"):
        item_sort(a, {"q2": "F1"})
    with pytest.raises(AgreementInputError):
        item_sort(a, ["F1"], p0="half")
    with pytest.raises(AgreementInputError):
        item_sort([["F1", "F2"], ["F1"]], ["F1", "F2"])
    with pytest.raises(AgreementInputError):
        item_sort([[["F1"]]], ["F1"])
    with pytest.raises(AgreementInputError, match="twice"):
        item_sort(a, ["F1"], domain=["F1", "F1", "F9"])


labels = st.sampled_from(["F1", "F2", "F3", "none", None])
designs = st.integers(1, 6).flatmap(lambda j: st.integers(1, 5).flatmap(lambda i: st.tuples(
    st.lists(st.lists(labels, min_size=i, max_size=i), min_size=j, max_size=j),
    st.lists(st.sampled_from(["F1", "F2", "F3"]), min_size=i, max_size=i))))


@settings(max_examples=80, deadline=None)
@given(designs, st.randoms(use_true_random=False))
def test_permutation_invariance_and_bounds(design, rnd):
    rows, key = design
    df = pd.DataFrame(rows, index=[f"j{i}" for i in range(len(rows))],
                      columns=[f"q{i}" for i in range(len(key))])
    keyser = pd.Series(key, index=df.columns)
    judges, items = list(df.index), list(df.columns)
    rnd.shuffle(judges)
    rnd.shuffle(items)
    base = item_sort(df, keyser, domain=DOMAIN)
    shuf = item_sort(df.loc[judges, items], keyser, domain=DOMAIN)
    pd.testing.assert_frame_equal(shuf.reindex(base.index), base)
    ok = base.dropna(subset=["psa"])
    assert ((ok["psa"] >= 0) & (ok["psa"] <= 1)).all()
    assert ((ok["csv"] >= -1) & (ok["csv"] <= 1)).all()
    amb = label_ambiguity(df, keyser, domain=DOMAIN)
    ent = amb["entropy"].dropna()
    assert ((ent >= -1e-12) & (ent <= 1 + 1e-12)).all()
    pd.testing.assert_frame_equal(label_ambiguity(df.loc[judges, items], keyser, domain=DOMAIN), amb)
    hr = hit_ratios(df, keyser, domain=DOMAIN)
    assert hr.n_placements == int(df.notna().to_numpy().sum())


# ------------------------------------------------------------------------------ audit regressions

@pytest.mark.parametrize("func", [item_sort, hit_ratios, confusion, label_ambiguity])
def test_a_table_without_items_raises_a_readable_error(func):
    # regression: zero columns escaped as numpy/pandas errors (argmax of an empty sequence, ...)
    with pytest.raises(AgreementInputError, match="no items"):
        func(np.empty((3, 0), dtype=object), [])
