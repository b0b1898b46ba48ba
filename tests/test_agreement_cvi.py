"""Content-validity indices: I-CVI, S-CVI, modified kappa, Lawshe's CVR."""

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st
from scipy.stats import binomtest

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.cvi import (LAWSHE_1975_MINIMA, cvr_critical, icvi_standard, item_cvi,
                                      kappa_star_band, lawshe_cvr, modified_kappa, scale_cvi)


def one_item(n, a):
    """N judges, A of them rating the item relevant (4), the rest 2."""
    return np.array([[4.0]] * a + [[2.0]] * (n - a))


# Polit, Beck & Owen (2007), "Is the CVI an acceptable indicator of content validity?", table of
# I-CVI, p_c and k* by N and A (values reproduced by computation in our METHODS notes).
@pytest.mark.parametrize("n, a, icvi, pc, kstar", [
    (3, 3, 1.00, .125, 1.00), (3, 2, .67, .375, .47), (5, 4, .80, .156, .76),
    (6, 5, .83, .094, .82), (8, 6, .75, .109, .72), (9, 7, .78, .070, .76)])
def test_modified_kappa_polit_beck_owen_rows(n, a, icvi, pc, kstar):
    row = modified_kappa(one_item(n, a)).iloc[0]
    assert (row["n"], row["agree"]) == (n, a)
    assert round(row["i_cvi"], 2) == icvi
    assert round(row["p_c"], 3) == pc
    assert round(row["kappa_star"], 2) == kstar


def test_modified_kappa_band_from_unrounded_values():
    # Cicchetti & Sparrow (1981) bands as applied by Polit, Beck & Owen (2007)
    assert modified_kappa(one_item(5, 4))["band"].iloc[0] == "excellent"   # 5, 4 -> k* .763 > .74
    assert modified_kappa(one_item(8, 6))["band"].iloc[0] == "good"        # k* .72
    assert modified_kappa(one_item(3, 2))["band"].iloc[0] == "fair"        # k* .47
    assert modified_kappa(one_item(4, 2))["band"].iloc[0] == "poor"
    assert kappa_star_band(0.7400001) == "excellent" and kappa_star_band(0.74) == "good"
    assert kappa_star_band(0.5999) == "fair" and kappa_star_band(0.6) == "good"
    assert kappa_star_band(0.3999) == "poor" and kappa_star_band(float("nan")) is None


def test_item_cvi_with_missing_answers_counts_only_answers():
    r = pd.DataFrame({"q1": [4, 3, np.nan, 1], "q2": [np.nan] * 4, "q3": [2, 2, 3, 4]},
                     index=["ann", "bo", "cy", "di"])
    cvi = item_cvi(r)
    assert cvi["q1"] == pytest.approx(2 / 3)     # hand count: 2 of 3 answers are 3 or 4
    assert math.isnan(cvi["q2"])
    assert cvi["q3"] == pytest.approx(0.5)
    assert item_cvi(r, relevant=(4,))["q3"] == pytest.approx(0.25)


def test_scale_cvi_ave_and_ua_by_hand():
    r = [[4, 2, 3, 4], [3, 3, 4, 4], [4, 4, 4, 1]]
    s = scale_cvi(r)
    icvi = [1, 2 / 3, 1, 2 / 3]
    assert s.ave == pytest.approx(np.mean(icvi))
    assert s.ua == pytest.approx(0.5)
    assert s.n_items == 4
    assert s.to_dict()["ave"] == pytest.approx(np.mean(icvi))


def test_scale_cvi_degenerate_gives_nan_and_note():
    s = scale_cvi([[np.nan, np.nan]])
    assert math.isnan(s.ave) and math.isnan(s.ua) and s.n_items == 0 and "undefined" in s.note
    assert s.to_dict()["ave"] is None


def test_icvi_standard():
    # Lynn (1986); Polit & Beck (2006) [wording from memory]: 1.00 with <= 5 judges, .78 with 6 or more
    assert [icvi_standard(n) for n in (1, 3, 5, 6, 9, 20)] == [1.0, 1.0, 1.0, .78, .78, .78]
    with pytest.raises(AgreementInputError):
        icvi_standard(0)


# Ayre & Scally (2014), "Critical values for Lawshe's content validity ratio": exact one-tailed binomial
# (values computed in our METHODS notes; matching the published table is [memory]).
@pytest.mark.parametrize("n, n_e, cvr", [(5, 5, 1.00), (8, 7, .75), (9, 8, .778), (10, 9, .80),
                                         (12, 10, .667), (15, 12, .60), (20, 15, .50), (30, 20, .333),
                                         (40, 26, .30)])
def test_cvr_critical_table(n, n_e, cvr):
    got_n, got_cvr = cvr_critical(n)
    assert got_n == n_e
    assert round(got_cvr, 3) == pytest.approx(cvr)


@pytest.mark.parametrize("n", range(1, 61))
def test_cvr_critical_is_smallest_significant_count_scipy(n):
    n_e, cvr = cvr_critical(n)
    if n_e is None:
        assert binomtest(n, n, 0.5, alternative="greater").pvalue >= 0.05 and math.isnan(cvr)
        return
    assert binomtest(n_e, n, 0.5, alternative="greater").pvalue < 0.05
    if n_e > 0:
        assert binomtest(n_e - 1, n, 0.5, alternative="greater").pvalue >= 0.05
    assert cvr == pytest.approx((n_e - n / 2) / (n / 2))


def test_lawshe_historical_minima_differ_from_exact_for_ten_or_more():
    # Lawshe (1975) table [memory]; Ayre & Scally (2014) show it is not exact for N >= 10
    assert LAWSHE_1975_MINIMA[10] == 0.62 and cvr_critical(10)[1] == pytest.approx(0.80)
    assert LAWSHE_1975_MINIMA[8] == pytest.approx(cvr_critical(8)[1])


def test_lawshe_cvr_by_hand_and_missing():
    # 3 essential, 2 useful, 1 not necessary
    r = pd.DataFrame({"q1": [3, 3, 3, 3, 3, 3, 3, 3, 2, 1], "q2": [3, 3, 3, 3, 3, 3, 3, 3, 3, np.nan],
                      "q3": [1, 2, 3, 3, 3, 2, 1, 1, 2, 2]})
    t = lawshe_cvr(r)
    assert t.loc["q1", "cvr"] == pytest.approx((8 - 5) / 5)
    assert t.loc["q1", "critical"] == pytest.approx(0.8) and not t.loc["q1", "meets"]
    assert t.loc["q2", "n"] == 9 and t.loc["q2", "n_essential"] == 9
    assert t.loc["q2", "critical_n_essential"] == 8 and t.loc["q2", "meets"]
    assert t.loc["q3", "cvr"] == pytest.approx((3 - 5) / 5)
    assert t.attrs["note"] == ""


def test_lawshe_cvr_small_panel_notes_that_nothing_can_be_significant():
    t = lawshe_cvr([[3], [3], [3], [3]])
    assert t.loc[0, "cvr"] == 1.0 and not t.loc[0, "meets"] and math.isnan(t.loc[0, "critical"])
    assert "4 judge" in t.attrs["note"]


def test_errors_for_wrong_input():
    with pytest.raises(AgreementInputError):
        item_cvi(pd.DataFrame({"q1": ["very", "not"]}))
    with pytest.raises(AgreementInputError):
        modified_kappa([[[1]]])
    with pytest.raises(AgreementInputError):
        item_cvi([[4, 3]], relevant=())
    with pytest.raises(AgreementInputError):
        cvr_critical(0)


ratings = st.integers(2, 7).flatmap(lambda j: st.integers(1, 6).flatmap(lambda i: st.lists(
    st.lists(st.one_of(st.none(), st.integers(1, 4)), min_size=i, max_size=i), min_size=j, max_size=j)))


@settings(max_examples=60, deadline=None)
@given(ratings, st.randoms(use_true_random=False))
def test_permuting_judges_or_items_changes_nothing(rows, rnd):
    df = pd.DataFrame(rows, dtype=float)
    judges, items = list(df.index), list(df.columns)
    rnd.shuffle(judges)
    rnd.shuffle(items)
    shuffled = df.loc[judges, items]
    pd.testing.assert_frame_equal(modified_kappa(shuffled).reindex(df.columns).rename_axis("item"), modified_kappa(df))
    pd.testing.assert_frame_equal(lawshe_cvr(shuffled, essential=4).reindex(df.columns).rename_axis("item"),
                                  lawshe_cvr(df, essential=4), check_like=True)
    k = modified_kappa(df)
    assert ((k["i_cvi"].dropna() >= 0) & (k["i_cvi"].dropna() <= 1)).all()
    assert (k["kappa_star"].dropna() <= 1 + 1e-12).all()


def test_the_078_standard_is_met_by_seven_of_nine():
    # Lynn (1986) derives .78 from 7 of 9 agreeing judges; Polit, Beck & Owen (2007, Table) list
    # N = 9, A = 7 -> I-CVI .78 as meeting the standard [memory for the table layout].
    from labelstudy.agreement import meets_icvi_standard, plan_panel
    assert meets_icvi_standard(7 / 9, 0.78)
    assert not meets_icvi_standard(6 / 8, 0.78)          # .75
    assert not meets_icvi_standard(5 / 6, 1.0)
    assert meets_icvi_standard(1.0, 1.0)
    assert not meets_icvi_standard(float("nan"), 0.78)
    assert plan_panel(9, 10, 3, n_sim=20, seed=1).min_icvi_agreements == 7
    assert plan_panel(10, 10, 3, n_sim=20, seed=1).min_icvi_agreements == 8   # 7/10 = .70 fails
