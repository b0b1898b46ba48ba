"""Properties every coefficient must have, checked on generated designs (hypothesis), the bootstrap's
behaviour, and the interpretation bands."""

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.alpha import LEVELS, krippendorff_alpha
from labelstudy.agreement.bands import BANDS, band
from labelstudy.agreement.gwet import brennan_prediger, gwet_ac1, gwet_ac2, percent_agreement
from labelstudy.agreement.kappa import fleiss_kappa, light_kappa

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def designs(draw, complete=False):
    """(judges x items matrix, domain, seed) with NaN for missing answers unless complete."""
    n_j = draw(st.integers(2, 6))
    n_i = draw(st.integers(3, 15))
    k = draw(st.integers(2, 5))
    seed = draw(st.integers(0, 2 ** 32 - 1))
    rng = np.random.default_rng(seed)
    domain = np.arange(1, k + 1, dtype=float)
    true = rng.integers(0, k, n_i)
    idx = np.where(rng.random((n_j, n_i)) < draw(st.floats(0.0, 1.0)), rng.integers(0, k, (n_j, n_i)), true)
    values = domain[idx]
    if not complete:
        values[rng.random(values.shape) < draw(st.floats(0.0, 0.4))] = np.nan
    return values, domain, seed


def all_stats(values, domain):
    """Every point estimate of this package for one design (NaN where undefined)."""
    out = {f"alpha_{lv}": krippendorff_alpha(values, lv, domain=domain).alpha for lv in LEVELS}
    out["ac1"] = gwet_ac1(values, domain=domain).coefficient
    out["ac2"] = gwet_ac2(values, domain=domain).coefficient
    out["bp"] = brennan_prediger(values, domain=domain).coefficient
    out["pa"] = percent_agreement(values).value
    out["light"] = light_kappa(values, domain=domain).kappa
    return out


def same(a, b):
    return all((np.isnan(a[k]) and np.isnan(b[k])) or a[k] == pytest.approx(b[k], abs=1e-9) for k in a)


@SETTINGS
@given(designs())
def test_permuting_judges_or_items_changes_nothing(design):
    values, domain, seed = design
    rng = np.random.default_rng(seed)
    base = all_stats(values, domain)
    assert same(base, all_stats(values[rng.permutation(values.shape[0])], domain))
    assert same(base, all_stats(values[:, rng.permutation(values.shape[1])], domain))


@SETTINGS
@given(designs())
def test_relabelling_nominal_codes_changes_nothing(design):
    values, domain, seed = design
    rng = np.random.default_rng(seed)
    new_codes = rng.choice(np.arange(10, 60), size=len(domain), replace=False).astype(float)
    mapping = dict(zip(domain, new_codes))
    relabelled = np.vectorize(lambda v: mapping.get(v, np.nan))(values)
    nominal = ("alpha_nominal", "ac1", "bp", "pa", "light")
    a = {k: v for k, v in all_stats(values, domain).items() if k in nominal}
    b = {k: v for k, v in all_stats(relabelled, new_codes).items() if k in nominal}
    assert same(a, b)


@SETTINGS
@given(designs())
def test_bounds_hold(design):
    values, domain, _ = design
    for name, value in all_stats(values, domain).items():
        if np.isfinite(value):
            assert value <= 1 + 1e-12, name
            if name == "pa":
                assert value >= 0
    r = gwet_ac1(values, domain=domain)
    if np.isfinite(r.coefficient):
        # Gwet (2008): p_e = sum pi_k (1 - pi_k) / (q - 1) <= (1 - 1/q) / (q - 1) = 1/q
        assert 0 <= r.p_a <= 1 and 0 <= r.p_e <= 1 / len(domain) + 1e-12


@SETTINGS
@given(designs(complete=True))
def test_perfect_agreement_gives_one(design):
    values, domain, _ = design
    perfect = np.tile(values[0], (values.shape[0], 1))
    if len(np.unique(perfect)) < 2:
        return                                        # no variation: alpha undefined, tested elsewhere
    for name, value in all_stats(perfect, domain).items():
        assert value == pytest.approx(1.0, abs=1e-12), name
    assert fleiss_kappa(perfect, domain=domain).kappa == pytest.approx(1.0, abs=1e-12)


@settings(max_examples=25, deadline=None)
@given(designs())
def test_units_bootstrap_interval_contains_estimate_and_is_seeded(design):
    values, domain, seed = design
    r = krippendorff_alpha(values, "nominal", domain=domain, n_boot=300, seed=seed % 1000)
    if not np.isfinite(r.alpha) or not np.isfinite(r.ci_low):
        return
    again = krippendorff_alpha(values, "nominal", domain=domain, n_boot=300, seed=seed % 1000)
    assert r == again
    assert r.ci_low <= r.ci_high <= 1.0
    if r.n_units >= 8 and r.n_boot_undefined == 0:
        # the percentile interval of a non-degenerate design brackets the estimate
        assert r.ci_low - 1e-9 <= r.alpha <= r.ci_high + 1e-9


def test_units_bootstrap_narrows_as_items_grow():
    # sampling theory: width shrinks roughly like 1/sqrt(n_units); compare mean widths on seeded data
    rng = np.random.default_rng(123)

    def width(n_items):
        widths = []
        for _ in range(8):
            true = rng.integers(1, 5, n_items).astype(float)
            values = np.where(rng.random((4, n_items)) < 0.3, rng.integers(1, 5, (4, n_items)), true)
            r = krippendorff_alpha(values, "nominal", domain=[1, 2, 3, 4], n_boot=400,
                                   seed=int(rng.integers(1e6)))
            widths.append(r.ci_high - r.ci_low)
        return np.mean(widths)

    narrow, wide = width(200), width(20)
    assert narrow < 0.6 * wide


@SETTINGS
@given(designs())
def test_pairs_bootstrap_is_seeded_and_bounded(design):
    values, domain, seed = design
    r = krippendorff_alpha(values, "ordinal", domain=domain, n_boot=200, method="pairs", seed=seed % 997)
    if not np.isfinite(r.alpha):
        return
    assert r == krippendorff_alpha(values, "ordinal", domain=domain, n_boot=200, method="pairs",
                                   seed=seed % 997)
    assert r.ci_low <= r.ci_high <= 1.0 and 0 <= r.q_below_min <= 1


# ------------------------------------------------------------------------------ bands

@pytest.mark.parametrize("value, word", [
    # Landis & Koch (1977), edges applied to unrounded values
    (-0.01, "poor"), (0.0, "slight"), (0.20, "slight"), (0.2001, "fair"), (0.40, "fair"),
    (0.41, "moderate"), (0.60, "moderate"), (0.61, "substantial"), (0.80, "substantial"),
    (0.81, "almost perfect"), (1.0, "almost perfect"),
])
def test_landis_koch(value, word):
    assert band(value) == word


@pytest.mark.parametrize("value, word", [
    # Krippendorff (2004) [memory]: >= .800 reliable, .667-.800 tentative, < .667 unreliable
    (0.666, "unreliable"), (0.667, "tentative conclusions only"), (0.7999, "tentative conclusions only"),
    (0.800, "reliable"),
])
def test_krippendorff_bands(value, word):
    assert band(value, "krippendorff") == word


@pytest.mark.parametrize("value, word", [
    # Cicchetti & Sparrow (1981) as applied by Polit, Beck & Owen (2007): fair .40-.59, good .60-.74,
    # excellent > .74 (unrounded values)
    (0.39, "poor"), (0.40, "fair"), (0.5999, "fair"), (0.60, "good"), (0.74, "good"),
    (0.7401, "excellent"), (1.0, "excellent"),
])
def test_cicchetti_sparrow(value, word):
    assert band(value, "cicchetti_sparrow") == word


def test_band_undefined_and_table():
    assert band(float("nan")) == "undefined" and band(None, "krippendorff") == "undefined"
    for scale in BANDS.values():
        assert scale["reference"] and scale["rule"] and scale["rows"]
    with pytest.raises(AgreementInputError, match="unknown band scale"):
        band(0.5, "made_up")


# ------------------------------------------------------------------------------ audit regressions

def test_band_of_text_raises_agreement_input_error():
    # regression: band("x") escaped as float()'s ValueError
    with pytest.raises(AgreementInputError, match="not a number"):
        band("high")
    assert band(None) == "undefined" and band("0.5") == "moderate"
