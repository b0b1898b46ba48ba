"""Cohen's, pairwise, Light's and Fleiss' kappa: published examples and reference libraries."""

import json

import numpy as np
import pytest
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import cohens_kappa as sm_cohens_kappa
from statsmodels.stats.inter_rater import fleiss_kappa as sm_fleiss_kappa

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.kappa import (cohen_kappa, fleiss_kappa, kappa_weights, light_kappa,
                                        pairwise_kappa)

NAN = np.nan


def table_to_pairs(table):
    """Two judges' answers (codes 0..K-1) reproducing a K x K contingency table (rows judge a)."""
    a, b = [], []
    for i, row in enumerate(table):
        for j, count in enumerate(row):
            a += [i] * count
            b += [j] * count
    return a, b


# SAS worked example reproduced in statsmodels' tests (test_inter_rater.py, table10): 3 x 3, n = 19
SAS_TABLE = [[0, 4, 1], [0, 8, 0], [0, 1, 5]]

# Fleiss (1971) "Measuring nominal scale agreement among many raters": 30 patients x 6 raters x 5
# diagnoses, copied from statsmodels/stats/tests/test_inter_rater.py (`diagnoses`, items as rows)
DIAGNOSES = np.array([
    [4, 4, 4, 4, 4, 4], [2, 2, 2, 5, 5, 5], [2, 3, 3, 3, 3, 5], [5, 5, 5, 5, 5, 5], [2, 2, 2, 4, 4, 4],
    [1, 1, 3, 3, 3, 3], [3, 3, 3, 3, 5, 5], [1, 1, 3, 3, 3, 4], [1, 1, 4, 4, 4, 4], [5, 5, 5, 5, 5, 5],
    [1, 4, 4, 4, 4, 4], [1, 2, 4, 4, 4, 4], [2, 2, 2, 3, 3, 3], [1, 4, 4, 4, 4, 4], [2, 2, 4, 4, 4, 5],
    [3, 3, 3, 3, 3, 5], [1, 1, 1, 4, 5, 5], [1, 1, 1, 1, 1, 2], [2, 2, 4, 4, 4, 4], [1, 3, 3, 5, 5, 5],
    [5, 5, 5, 5, 5, 5], [2, 4, 4, 4, 4, 4], [2, 2, 4, 5, 5, 5], [1, 1, 4, 4, 4, 4], [1, 4, 4, 4, 4, 5],
    [2, 2, 2, 2, 2, 4], [1, 1, 1, 1, 5, 5], [2, 2, 4, 4, 4, 4], [1, 3, 3, 3, 3, 3], [5, 5, 5, 5, 5, 5],
]).T.astype(float)          # -> 6 judges x 30 items

# 10 subjects x 14 raters x 5 categories count table (statsmodels' test_inter_rater.py table1)
COUNTS_10x14 = [(0, 0, 0, 0, 14), (0, 2, 6, 4, 2), (0, 0, 3, 5, 6), (0, 3, 9, 2, 0), (2, 2, 8, 1, 1),
                (7, 7, 0, 0, 0), (3, 2, 6, 3, 0), (2, 5, 3, 2, 2), (6, 5, 2, 1, 0), (0, 2, 2, 3, 7)]


def counts_to_matrix(counts):
    return np.array([np.repeat(np.arange(1, len(row) + 1), row) for row in counts], dtype=float).T


# ------------------------------------------------------------------------------ Cohen: published

def test_cohen_sas_example_unweighted():
    # SAS printout reproduced in statsmodels' tests [computed; published in that printout]:
    # kappa .4842, ASE .1380, 95% CI .2137 to .7547, ASE under H0 .1484, Z 3.2626, two-sided p .0011
    a, b = table_to_pairs(SAS_TABLE)
    r = cohen_kappa(a, b, domain=[0, 1, 2])
    assert round(r.kappa, 4) == 0.4842 and round(r.se, 4) == 0.1380 and round(r.se0, 4) == 0.1484
    assert round(r.ci_low, 4) == 0.2137 and round(r.ci_high, 4) == 0.7547
    assert round(r.z, 4) == 3.2626 and round(r.p_value, 4) == 0.0011
    assert r.n == 19


def test_cohen_sas_example_linear():
    # same SAS printout, weighted (linear): kappa .4701, ASE .1457, CI .1845 to .7558, ASE0 .1426,
    # Z 3.2971, two-sided p .0010
    a, b = table_to_pairs(SAS_TABLE)
    r = cohen_kappa(a, b, weights="linear", domain=[0, 1, 2])
    assert round(r.kappa, 4) == 0.4701 and round(r.se, 4) == 0.1457 and round(r.se0, 4) == 0.1426
    assert round(r.ci_low, 4) == 0.1845 and round(r.ci_high, 4) == 0.7558
    assert round(r.z, 4) == 3.2971 and round(r.p_value, 4) == 0.0010


# ------------------------------------------------------------------------------ Cohen: reference libraries

@pytest.mark.parametrize("weights", [None, "linear", "quadratic"])
@pytest.mark.filterwarnings("ignore::RuntimeWarning")
def test_cohen_matches_sklearn_and_statsmodels(weights):
    rng = np.random.default_rng({None: 1, "linear": 2, "quadratic": 3}[weights])
    compared = 0
    for _ in range(200):
        k = int(rng.integers(2, 7))
        domain = np.sort(rng.choice(np.arange(1, 15), size=k, replace=False)).astype(float)
        n = int(rng.integers(5, 60))
        a = domain[rng.integers(0, k, n)]
        b = np.where(rng.random(n) < 0.5, a, domain[rng.integers(0, k, n)])
        a[rng.random(n) < 0.15] = NAN
        b[rng.random(n) < 0.15] = NAN
        ours = cohen_kappa(a, b, weights=weights, domain=domain)
        both = ~(np.isnan(a) | np.isnan(b))
        if not np.isfinite(ours.kappa):
            assert ours.note
            continue
        ref = cohen_kappa_score(a[both], b[both], labels=domain, weights=weights)
        assert ours.kappa == pytest.approx(ref, abs=1e-9)
        table = np.array([[np.sum((a[both] == c) & (b[both] == d)) for d in domain] for c in domain])
        sm = sm_cohens_kappa(table) if weights is None else sm_cohens_kappa(table, wt=weights)
        assert ours.kappa == pytest.approx(sm.kappa, abs=1e-9)
        # variances first: at perfect agreement statsmodels' variance can be -1e-17 (sqrt -> nan); ours
        # clips at 0
        assert ours.se ** 2 == pytest.approx(max(sm.var_kappa, 0.0), abs=1e-12)
        assert ours.se0 ** 2 == pytest.approx(max(sm.var_kappa0, 0.0), abs=1e-12)
        if np.isfinite(sm.std_kappa):
            assert ours.se == pytest.approx(sm.std_kappa, abs=1e-9)
        if np.isfinite(sm.std_kappa0) and sm.std_kappa0 > 1e-6:
            assert ours.se0 == pytest.approx(sm.std_kappa0, abs=1e-9)
            assert ours.p_value == pytest.approx(sm.pvalue_two_sided, abs=1e-9)
        compared += 1
    assert compared > 180


def test_kappa_weights_definition():
    # Cohen (1968) agreement weights over positions: linear 1 - |i-j|/(k-1), quadratic 1 - (i-j)^2/(k-1)^2
    assert kappa_weights(5, "quadratic")[0, 2] == pytest.approx(1 - 4 / 16)
    assert kappa_weights(5, "linear")[1, 4] == pytest.approx(1 - 3 / 4)
    with pytest.raises(AgreementInputError):
        kappa_weights(3, "cubic")


def test_cohen_degenerate_and_wrong_input():
    r = cohen_kappa([1, 1, 1], [1, 1, 1], domain=[1, 2])
    assert np.isnan(r.kappa) and "undefined" in r.note
    r = cohen_kappa([1, NAN], [NAN, 2])
    assert np.isnan(r.kappa) and r.n == 0 and "both judges" in r.note
    with pytest.raises(AgreementInputError, match="different numbers"):
        cohen_kappa([1, 2, 3], [1, 2])
    with pytest.raises(AgreementInputError, match="not in the declared domain"):
        cohen_kappa([1, 2, 3], [1, 2, 9], domain=[1, 2, 3])
    with pytest.raises(AgreementInputError, match="number"):
        cohen_kappa(["a", "b"], [1, 2])


def test_cohen_repr_and_json():
    a, b = table_to_pairs(SAS_TABLE)
    r = cohen_kappa(a, b)
    assert repr(r).startswith("CohenKappa(kappa=0.484, weights='none', se=0.138, 95% CI [.21, .75]")
    assert json.loads(json.dumps(r.to_dict()))["n"] == 19


# ------------------------------------------------------------------------------ pairwise and Light

def test_pairwise_matches_cohen_loop_and_light_is_mean():
    rng = np.random.default_rng(9)
    data = rng.integers(1, 5, size=(6, 25)).astype(float)
    data[1] = np.where(rng.random(25) < 0.7, data[0], data[1])
    data[rng.random(data.shape) < 0.2] = NAN
    data[5, :] = NAN
    data[5, :2] = [1, 2]                    # judge 5 shares at most 2 items with anyone
    for weights in (None, "quadratic"):
        table = pairwise_kappa(data, weights=weights, domain=[1, 2, 3, 4], min_items=3)
        assert (np.diag(table) == 1).all()
        values = []
        for i in range(6):
            for j in range(i + 1, 6):
                common = ~(np.isnan(data[i]) | np.isnan(data[j]))
                expected = cohen_kappa(data[i], data[j], weights=weights, domain=[1, 2, 3, 4]).kappa
                if common.sum() < 3:
                    assert np.isnan(table.iloc[i, j])
                    continue
                assert table.iloc[i, j] == pytest.approx(expected, abs=1e-12)
                assert table.iloc[j, i] == pytest.approx(expected, abs=1e-12)
        light = light_kappa(data, weights=weights, domain=[1, 2, 3, 4])
        full = pairwise_kappa(data, weights=weights, domain=[1, 2, 3, 4]).to_numpy()
        upper = full[np.triu_indices(6, 1)]
        # Light (1971): mean of the pairwise kappas
        assert light.kappa == pytest.approx(np.nanmean(upper), abs=1e-12)
        assert light.n_pairs == np.isfinite(upper).sum()


def test_light_degenerate():
    assert "only one judge" in light_kappa([[1, 2, 3]]).note
    r = light_kappa([[1, 1, 1], [1, 1, 1]], domain=[1, 2])
    assert np.isnan(r.kappa) and r.n_pairs == 0 and r.note


# ------------------------------------------------------------------------------ Fleiss

def test_fleiss_1971_diagnoses():
    r = fleiss_kappa(DIAGNOSES)
    # Fleiss (1971) diagnoses data: kappa = 0.4302 [computed; R irr prints 0.4302445]
    assert round(r.kappa, 4) == 0.4302
    assert r.kappa == pytest.approx(0.4302445, abs=1e-7)
    # per-category kappas of Fleiss (1971), as R irr's kappam.fleiss(detail=TRUE) prints them [memory]
    assert r.per_category.round(3).tolist() == [0.245, 0.245, 0.520, 0.471, 0.566]
    # Fleiss, Nee & Landis (1979) SE under H0: R irr prints z = 17.7 for these data [memory]
    assert round(r.z, 1) == 17.7
    assert r.n_items == 30 and r.n_judges == 6


def test_fleiss_10_by_14_table():
    # 10 subjects x 14 raters: kappa 0.2099 [computed with statsmodels fleiss_kappa; .210 as commonly printed]
    r = fleiss_kappa(counts_to_matrix(COUNTS_10x14))
    assert round(r.kappa, 4) == 0.2099
    assert r.p_o == pytest.approx(0.3780, abs=5e-5)          # Pbar as printed with that example: .378
    assert r.p_e == pytest.approx(0.2128, abs=5e-5)          # Pe: .213 (0.2128 to four places)


def test_fleiss_matches_statsmodels_on_random_designs():
    rng = np.random.default_rng(31)
    compared = 0
    for _ in range(200):
        n_j, n_i, k = int(rng.integers(2, 9)), int(rng.integers(2, 40)), int(rng.integers(2, 7))
        domain = np.arange(1, k + 1, dtype=float)
        data = domain[rng.integers(0, k, size=(n_j, n_i))]
        data[1] = np.where(rng.random(n_i) < 0.5, data[0], data[1])
        r = fleiss_kappa(data, domain=domain)
        table = np.array([[np.sum(data[:, i] == c) for c in domain] for i in range(n_i)])
        if r.note:
            assert np.isnan(r.kappa)
            continue
        assert r.kappa == pytest.approx(sm_fleiss_kappa(table), abs=1e-9)
        compared += 1
    assert compared > 180


def test_fleiss_allows_different_judges_with_equal_counts_and_refuses_unequal():
    data = np.array([[1, 2, NAN], [1, NAN, 2], [NAN, 2, 2]])       # two answers per item
    assert np.isfinite(fleiss_kappa(data).kappa)
    with pytest.raises(AgreementInputError, match="Krippendorff's alpha or Gwet's AC1"):
        fleiss_kappa([[1, 2, NAN], [1, 2, 2]])


def test_fleiss_degenerate():
    r = fleiss_kappa([[3, 3, 3], [3, 3, 3]], domain=[1, 2, 3])
    assert np.isnan(r.kappa) and "same answer" in r.note
    assert "only one answer" in fleiss_kappa([[1, 2, 3]]).note
    assert "no answers" in fleiss_kappa([[NAN, NAN], [NAN, NAN]]).note
    assert json.dumps(fleiss_kappa(DIAGNOSES).to_dict())


# ------------------------------------------------------------------------------ audit regressions

@pytest.mark.parametrize("data", [[[NAN, NAN], [NAN, NAN]], np.zeros((3, 0)), np.zeros((0, 3))])
def test_pairwise_and_light_without_any_answer_are_nan_not_a_crash(data):
    # regression: no answers (no categories) used to escape as a numpy reshape ValueError
    table = pairwise_kappa(data)
    n_j = np.asarray(data).shape[0]
    assert table.shape == (n_j, n_j)
    assert np.isnan(table.to_numpy()[~np.eye(n_j, dtype=bool)]).all()
    r = light_kappa(data)
    assert np.isnan(r.kappa) and r.n_pairs == 0 and r.note
