"""Gwet's AC1/AC2, Brennan-Prediger and percent agreement: published values and the irrCAC package."""

import json
import warnings

import numpy as np
import pandas as pd
import pytest
from irrCAC.raw import CAC

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.gwet import (GWET_WEIGHTS, brennan_prediger, gwet_ac1, gwet_ac2, gwet_weights,
                                       percent_agreement)
from labelstudy.agreement.kappa import fleiss_kappa

NAN = np.nan
# Krippendorff (2011), "Computing Krippendorff's Alpha-Reliability": 4 observers x 12 units.
from tests.helpers_published import K2011  # noqa: E402


def irrcac(values, domain, weights="identity"):
    """irrCAC expects items as rows and raters as columns: transpose our judges x items matrix."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")          # irrCAC triggers a pandas SettingWithCopyWarning
        return CAC(pd.DataFrame(values.T), weights=weights, categories=[float(d) for d in domain], digits=15)


def random_design(rng):
    n_j, n_i, k = int(rng.integers(2, 8)), int(rng.integers(3, 35)), int(rng.integers(2, 7))
    domain = np.sort(rng.choice(np.arange(1, 12), size=k, replace=False)).astype(float)
    true = rng.integers(0, k, size=n_i)
    idx = np.where(rng.random((n_j, n_i)) < rng.uniform(0.1, 0.8), rng.integers(0, k, (n_j, n_i)), true)
    values = domain[idx]
    values[rng.random(values.shape) < rng.uniform(0, 0.35)] = NAN
    return values, domain


# ------------------------------------------------------------------------------ published values

def test_ac1_krippendorff_matrix():
    # Gwet's irrCAC benchmarking vignette (R package) on the Krippendorff (2011) matrix, items as rows:
    # AC1 = 0.7754, SE 0.1430, p_a .8182, p_e .1903 [published; computed with the irrCAC Python package]
    r = gwet_ac1(K2011)
    assert round(r.coefficient, 4) == 0.7754
    assert abs(r.se - 0.1430) < 5.1e-5          # irrCAC prints 0.14295, which rounds to .1430
    assert round(r.p_a, 4) == 0.8182 and round(r.p_e, 4) == 0.1903
    assert r.n_items == 12
    # irrCAC docstring for the same data: 95% interval (0.46081, 1), p 0.00021 [computed with irrCAC]
    assert round(r.ci_low, 5) == 0.46081 and r.ci_high == 1.0
    assert round(r.p_value, 5) == 0.00021


def test_brennan_prediger_krippendorff_matrix():
    # same data: Brennan-Prediger .7727 [computed]; p_e = 1/q = 1/5
    r = brennan_prediger(K2011)
    assert round(r.coefficient, 4) == 0.7727 and r.p_e == pytest.approx(0.2)


def test_bp_uses_full_domain():
    # Brennan & Prediger (1981): p_e = 1/q with q the number of categories offered, used or not
    assert brennan_prediger(K2011, domain=range(1, 9)).p_e == pytest.approx(1 / 8)


def test_percent_agreement_krippendorff_matrix():
    # p_a of the same data (irrCAC vignette): .8182 over the 11 items with two or more answers
    r = percent_agreement(K2011)
    assert round(r.value, 4) == 0.8182 and r.n_items == 11


def test_ac2_identity_is_ac1():
    assert gwet_ac2(K2011, weights="identity").coefficient == gwet_ac1(K2011).coefficient


# ------------------------------------------------------------------------------ irrCAC

def test_ac1_bp_percent_match_irrcac_on_random_designs():
    rng = np.random.default_rng(77)
    compared = 0
    for _ in range(200):
        values, domain = random_design(rng)
        ours = gwet_ac1(values, domain=domain)
        if ours.note:
            assert np.isnan(ours.coefficient)
            continue
        ref = irrcac(values, domain)
        g = ref.gwet()["est"]
        assert ours.coefficient == pytest.approx(g["coefficient_value"], abs=1e-9)
        assert ours.p_a == pytest.approx(g["pa"], abs=1e-9) and ours.p_e == pytest.approx(g["pe"], abs=1e-9)
        if ours.se > 1e-12:
            assert ours.se == pytest.approx(g["se"], abs=1e-9)
            assert ours.ci_low == pytest.approx(g["confidence_interval"][0], abs=1e-9)
            assert ours.ci_high == pytest.approx(g["confidence_interval"][1], abs=1e-9)
            assert ours.p_value == pytest.approx(g["p_value"], abs=1e-9)
        bp = ref.bp()["est"]
        ours_bp = brennan_prediger(values, domain=domain)
        assert ours_bp.coefficient == pytest.approx(bp["coefficient_value"], abs=1e-9)
        if ours_bp.se > 1e-12:
            assert ours_bp.se == pytest.approx(bp["se"], abs=1e-9)
        assert percent_agreement(values).value == pytest.approx(g["pa"], abs=1e-9)
        compared += 1
    assert compared > 180


@pytest.mark.parametrize("weights", GWET_WEIGHTS)
def test_ac2_matches_irrcac_for_every_weight_scheme(weights):
    rng = np.random.default_rng(GWET_WEIGHTS.index(weights) + 100)
    # 200 designs for the schemes the brief requires to match (identity is covered by the AC1 test above)
    n_designs = 200 if weights in ("linear", "quadratic", "ordinal") else 30
    compared = 0
    for _ in range(n_designs):
        values, domain = random_design(rng)
        ours = gwet_ac2(values, weights=weights, domain=domain)
        if ours.note:
            continue
        g = irrcac(values, domain, weights).gwet()["est"]
        assert ours.coefficient == pytest.approx(g["coefficient_value"], abs=1e-9)
        assert ours.p_a == pytest.approx(g["pa"], abs=1e-9) and ours.p_e == pytest.approx(g["pe"], abs=1e-9)
        if ours.se > 1e-12:
            assert ours.se == pytest.approx(g["se"], abs=1e-9)
        compared += 1
    assert compared > 0.85 * n_designs


def test_weights_match_irrcac_definitions():
    from irrCAC.weights import Weights
    domain = [1.0, 2.0, 4.0, 5.0, 9.0]
    for name in GWET_WEIGHTS:
        assert np.allclose(gwet_weights(domain, name), Weights(domain)[name], atol=1e-12), name


# ------------------------------------------------------------------------------ degenerate and wrong input

def test_degenerate_cases():
    assert "only one judge" in gwet_ac1([[1, 2, 3]]).note
    r = gwet_ac1([[1, NAN, 2], [NAN, 2, NAN]])
    assert np.isnan(r.coefficient) and "two or more judges" in r.note
    r = gwet_ac1([[2, 2], [2, 2]])
    assert np.isnan(r.coefficient) and "one category" in r.note
    # all answers equal but two categories offered: AC1 is defined (p_e = 0) and equals 1
    assert gwet_ac1([[2, 2], [2, 2]], domain=[1, 2]).coefficient == 1.0
    assert np.isnan(percent_agreement([[NAN, NAN], [NAN, NAN]]).value)


def test_wrong_input():
    with pytest.raises(AgreementInputError, match="weights"):
        gwet_ac2(K2011, weights="cubic")
    with pytest.raises(AgreementInputError, match="ratio weights"):
        gwet_ac2([[0, 1], [0, 2]], weights="ratio")
    with pytest.raises(AgreementInputError, match="different lengths"):
        gwet_ac1([[1, 2, 3], [1]])
    with pytest.raises(AgreementInputError, match="ci"):
        gwet_ac1(K2011, ci=95)


def test_ac1_beside_kappa_on_skewed_relevance_ratings():
    # the kappa paradox (Feinstein & Cicchetti 1990): near-unanimous "relevant" ratings give a low Fleiss
    # kappa but a high AC1 and percent agreement
    data = np.full((5, 20), 4.0)
    data[0, 3] = data[1, 11] = data[2, 17] = 3.0
    kappa = fleiss_kappa(data, domain=[3, 4]).kappa
    ac1 = gwet_ac1(data, domain=[3, 4]).coefficient
    assert kappa < 0.1 and ac1 > 0.9 and percent_agreement(data).value > 0.9


def test_repr_and_json():
    r = gwet_ac1(K2011)
    assert repr(r).startswith("GwetAC1(coefficient=0.775, se=0.143, 95% CI [.46, 1.00]")
    assert repr(gwet_ac2(K2011)).startswith("GwetAC2(coefficient=")
    assert repr(brennan_prediger(K2011)).startswith("BrennanPrediger(coefficient=0.773")
    assert json.loads(json.dumps(r.to_dict()))["name"] == "AC1"


# ------------------------------------------------------------------------------ audit regressions

def test_single_item_says_why_the_standard_error_is_missing():
    # regression: one item gave se = NaN without a note (Var = sum (c_i - c)^2 / (n (n - 1)) needs n >= 2)
    r = gwet_ac1([[1], [2], [1]], domain=[1, 2])
    assert np.isfinite(r.coefficient) and np.isnan(r.se) and "single item" in r.note
    assert gwet_ac1(K2011).note == ""
