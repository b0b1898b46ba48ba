"""Krippendorff's alpha: published worked example, the krippendorff package, the bootstrap, degenerate input."""

import json
import warnings

import krippendorff
import numpy as np
import pandas as pd
import pytest

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.alpha import (LEVELS, alpha_replicates, coincidences, distance_matrix,
                                        krippendorff_alpha, unit_bootstrap_indices)

NAN = np.nan
# Krippendorff (2011), "Computing Krippendorff's Alpha-Reliability": 4 observers x 12 units.
from tests.helpers_published import K2011  # noqa: E402


def random_design(rng, max_judges=7, max_items=30, missing=None):
    """Judges x items codes from a random domain (not always consecutive), with missing answers."""
    n_j = int(rng.integers(2, max_judges + 1))
    n_i = int(rng.integers(3, max_items + 1))
    k = int(rng.integers(2, 7))
    domain = np.sort(rng.choice(np.arange(1, 12), size=k, replace=False)).astype(float)
    # correlated judges: a true code per item plus noise, so alpha spans a useful range
    true = rng.integers(0, k, size=n_i)
    noise = rng.random((n_j, n_i)) < rng.uniform(0.1, 0.9)
    idx = np.where(noise, rng.integers(0, k, size=(n_j, n_i)), true[None, :])
    values = domain[idx]
    rate = rng.uniform(0, 0.4) if missing is None else missing
    values[rng.random(values.shape) < rate] = NAN
    return values, domain


# ------------------------------------------------------------------------------ published example

@pytest.mark.parametrize("level, printed, package", [
    # Krippendorff (2011) worked example; values computed with the krippendorff package
    # (0.743421, 0.815388, 0.849107, 0.797403); the printed interval figure is [memory] in METHODS.md
    ("nominal", 0.743, 0.743421), ("ordinal", 0.815, 0.815388),
    ("interval", 0.849, 0.849107), ("ratio", 0.797, 0.797403),
])
def test_krippendorff_2011_example(level, printed, package):
    result = krippendorff_alpha(K2011, level)
    assert round(result.alpha, 3) == printed
    assert round(result.alpha, 6) == package
    assert result.n_units == 11 and result.n_pairable == 40 and result.note == ""


def test_krippendorff_2011_coincidences():
    # Krippendorff (2011): n = 40 pairable values, n_c = (9, 13, 10, 5, 3)
    o = coincidences(K2011)
    assert o.to_numpy().sum() == pytest.approx(40)
    assert o.sum(axis=1).to_numpy() == pytest.approx([9, 13, 10, 5, 3])
    assert np.allclose(o.to_numpy(), o.to_numpy().T)
    # Krippendorff (2011) coincidence table: o_11 = 7, o_12 = 4/3, o_22 = 10, o_55 = 3
    assert o.loc[1, 1] == pytest.approx(7) and o.loc[1, 2] == pytest.approx(4 / 3)
    assert o.loc[2, 2] == pytest.approx(10) and o.loc[5, 5] == pytest.approx(3)


def test_distance_matrix_levels():
    # Krippendorff (2011) metrics: nominal, interval, ratio closed forms
    dom = [1, 2, 4]
    assert distance_matrix(dom, "nominal").tolist() == [[0, 1, 1], [1, 0, 1], [1, 1, 0]]
    assert distance_matrix(dom, "interval")[0, 2] == 9
    assert distance_matrix(dom, "ratio")[0, 2] == pytest.approx((3 / 5) ** 2)
    # ordinal with n_c = (9, 13, 10, 5, 3) (Krippendorff 2011): d2(1,2) = (9 + 13 - 11)^2 = 121
    d2 = distance_matrix([1, 2, 3, 4, 5], "ordinal", n_c=[9, 13, 10, 5, 3])
    assert d2[0, 1] == pytest.approx(121) and d2[0, 2] == pytest.approx((9 + 13 + 10 - 9.5) ** 2)


# ------------------------------------------------------------------------------ reference library

def test_matches_krippendorff_package_on_random_designs():
    rng = np.random.default_rng(20240501)
    compared = 0
    for _ in range(200):
        values, domain = random_design(rng)
        for level in LEVELS:
            ours = krippendorff_alpha(values, level, domain=domain)
            if ours.note:
                assert np.isnan(ours.alpha)
                continue
            ref = krippendorff.alpha(reliability_data=values, value_domain=domain, level_of_measurement=level)
            assert ours.alpha == pytest.approx(ref, abs=1e-9)
            # the vectorised replicate code gives the same number on the unresampled data
            same = alpha_replicates(values, level, domain=domain, indices=np.arange(values.shape[1])[None])
            assert same[0] == pytest.approx(ref, abs=1e-9)
            compared += 1
    assert compared > 600


def test_dataframe_input_keeps_axes():
    frame = pd.DataFrame(K2011, index=list("ABCD"), columns=[f"u{i}" for i in range(12)])
    assert krippendorff_alpha(frame).alpha == pytest.approx(0.743421, abs=1e-6)


# ------------------------------------------------------------------------------ bootstrap

@pytest.mark.parametrize("level", LEVELS)
def test_units_bootstrap_equals_naive_loop_on_same_resamples(level):
    rng = np.random.default_rng(7)
    values, domain = random_design(rng, max_judges=5, max_items=25, missing=0.15)
    values = np.vstack([values, values[0]])            # keep agreement high enough to be interesting
    n_boot = 2000 if level == "nominal" else 300
    idx = unit_bootstrap_indices(values, n_boot, seed=11)
    vectorised = alpha_replicates(values, level, domain=domain, indices=idx)
    naive = np.empty(n_boot)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)      # the package warns on no-variation resamples
        for b, cols in enumerate(idx):
            naive[b] = krippendorff.alpha(reliability_data=values[:, cols], value_domain=domain,
                                          level_of_measurement=level)
    finite = np.isfinite(naive)
    assert np.array_equal(finite, np.isfinite(vectorised))
    assert np.allclose(vectorised[finite], naive[finite], atol=1e-9, rtol=0)   # per replicate
    if level == "nominal":
        result = krippendorff_alpha(values, level, domain=domain, n_boot=n_boot, seed=11)
        low, high = np.percentile(naive[finite], [2.5, 97.5])
        assert abs(result.ci_low - low) < 0.01 and abs(result.ci_high - high) < 0.01
        assert result.ci_low == pytest.approx(low, abs=1e-9) and result.ci_high == pytest.approx(high, abs=1e-9)


def test_bootstrap_is_seeded_and_reported():
    a = krippendorff_alpha(K2011, n_boot=500, seed=3)
    b = krippendorff_alpha(K2011, n_boot=500, seed=3)
    c = krippendorff_alpha(K2011, n_boot=500, seed=4)
    assert a == b
    assert (a.ci_low, a.ci_high, a.q_below_min) != (c.ci_low, c.ci_high, c.q_below_min)
    assert a.ci_low <= a.alpha <= a.ci_high
    assert 0 <= a.q_below_min <= 1
    none = krippendorff_alpha(K2011)
    assert np.isnan(none.ci_low) and np.isnan(none.ci_high) and np.isnan(none.q_below_min)


def test_pairs_bootstrap_centres_on_alpha():
    # Hayes & Krippendorff (2007): D_e fixed, pairs drawn from o_ck / n, so E[D_o*] = D_o and the
    # replicates centre on the observed alpha; q = share below alpha_min
    rng = np.random.default_rng(5)
    values, domain = random_design(rng, max_judges=6, max_items=40, missing=0.1)
    r = krippendorff_alpha(values, "interval", domain=domain, n_boot=4000, method="pairs", seed=2)
    assert r.method == "pairs" and r.ci_low < r.alpha < r.ci_high
    mid = (r.ci_low + r.ci_high) / 2
    assert abs(mid - r.alpha) < 0.5 * (r.ci_high - r.ci_low)
    assert r.ci_high <= 1.0
    strict = krippendorff_alpha(values, "interval", domain=domain, n_boot=4000, method="pairs", seed=2,
                                alpha_min=0.999)
    assert strict.q_below_min >= r.q_below_min


def test_pairs_bootstrap_perfect_agreement_is_one():
    data = np.array([[1, 2, 3, 1, 2], [1, 2, 3, 1, 2], [1, 2, 3, NAN, 2]])
    r = krippendorff_alpha(data, n_boot=200, method="pairs", seed=1)
    assert r.alpha == 1.0 and r.ci_low == 1.0 and r.ci_high == 1.0 and r.q_below_min == 0.0


# ------------------------------------------------------------------------------ degenerate and wrong input

def test_no_variation_is_nan_with_note():
    r = krippendorff_alpha([[2, 2, 2], [2, 2, 2]], domain=[1, 2, 3], n_boot=100, seed=1)
    assert np.isnan(r.alpha) and np.isnan(r.ci_low)
    assert r.note == "alpha is undefined: every judge gave the same answer"


def test_one_judge_all_missing_and_no_pairs():
    assert "only one judge" in krippendorff_alpha([[1, 2, 3]]).note
    r = krippendorff_alpha([[NAN, NAN], [NAN, NAN]])
    assert np.isnan(r.alpha) and "pairable" in r.note
    r = krippendorff_alpha([[1, NAN, 2], [NAN, 2, NAN]])
    assert np.isnan(r.alpha) and "pairable" in r.note and r.n_units == 0


def test_wrong_input_raises_agreement_input_error():
    with pytest.raises(AgreementInputError, match="different lengths"):
        krippendorff_alpha([[1, 2, 3], [1, 2]])
    with pytest.raises(AgreementInputError, match="2-D"):
        krippendorff_alpha(np.ones((2, 2, 2)))
    with pytest.raises(AgreementInputError, match="not in the declared domain"):
        krippendorff_alpha([[1, 2], [1, 7]], domain=[1, 2, 3])
    with pytest.raises(AgreementInputError, match="level"):
        krippendorff_alpha(K2011, "circular")
    with pytest.raises(AgreementInputError, match="method"):
        krippendorff_alpha(K2011, n_boot=10, method="jackknife")
    with pytest.raises(AgreementInputError, match="non-negative"):
        krippendorff_alpha([[-1, 2], [-1, 3]], "ratio")


def test_repr_and_to_dict():
    r = krippendorff_alpha(K2011, n_boot=300, seed=1)
    text = repr(r)
    assert text.startswith("KrippendorffAlpha(alpha=0.743, level='nominal', 95% CI [")
    assert "by units bootstrap, n_units=11)" in text
    d = r.to_dict()
    assert json.loads(json.dumps(d))["alpha"] == pytest.approx(0.743421, abs=1e-6)
    assert krippendorff_alpha(K2011).to_dict()["ci_low"] is None


# ------------------------------------------------------------------------------ audit regressions

def test_replicate_indices_are_checked():
    # regression: 1-D indices were silently read as one-item replicates; an out-of-range column escaped as
    # a numpy reshape ValueError; a negative n_boot as "negative dimensions are not allowed"
    with pytest.raises(AgreementInputError, match="2-D"):
        alpha_replicates(K2011, indices=np.arange(12))
    with pytest.raises(AgreementInputError, match="between 0 and 11"):
        alpha_replicates(K2011, indices=np.array([[0, 12]]))
    with pytest.raises(AgreementInputError, match="whole column numbers"):
        alpha_replicates(K2011, indices=np.array([[0.5, 1.0]]))
    with pytest.raises(AgreementInputError, match="n_boot"):
        unit_bootstrap_indices(K2011, -1)
