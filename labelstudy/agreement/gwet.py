"""Gwet's AC1 / AC2, Brennan-Prediger and percent agreement for many judges, missing answers allowed.

Data convention: judges x items (rows judges, columns items, NaN = no answer). Formulas follow Gwet (2008),
"Computing inter-rater reliability and its variance in the presence of high agreement", and Gwet (2014),
Handbook of Inter-Rater Reliability, 4th ed.; the variance is the one conditional on the sample of judges,
as the irrCAC package computes it (finite-population correction f = 0).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
from scipy import stats

from labelstudy.agreement._data import AgreementInputError, as_matrix, resolve_domain
from labelstudy.agreement._results import ResultMixin, fmt, fmt_ci

__all__ = ["ChanceCorrected", "GWET_WEIGHTS", "PercentAgreement", "brennan_prediger", "gwet_ac1",
           "gwet_ac2", "gwet_weights", "percent_agreement"]

GWET_WEIGHTS = ("identity", "linear", "quadratic", "ordinal", "radical", "ratio", "circular", "bipolar")


@dataclass(frozen=True, repr=False)
class ChanceCorrected(ResultMixin):
    """A chance-corrected agreement coefficient (AC1, AC2 or Brennan-Prediger) with its t interval."""

    coefficient: float
    se: float
    ci_low: float
    ci_high: float
    p_a: float
    p_e: float
    p_value: float
    n_items: int
    name: str = "AC1"
    weights: str = "identity"
    ci: float = 0.95
    note: str = ""

    def __repr__(self) -> str:
        interval = fmt_ci(self.ci_low, self.ci_high, self.ci)
        parts = [f"coefficient={fmt(self.coefficient)}"]
        if self.weights != "identity":
            parts.append(f"weights={self.weights!r}")
        parts.append(f"se={fmt(self.se)}")
        if interval:
            parts.append(interval)
        parts += [f"p_a={fmt(self.p_a)}", f"p_e={fmt(self.p_e)}", f"n_items={self.n_items}"]
        if self.note:
            parts.append(f"note={self.note!r}")
        cls = {"AC1": "GwetAC1", "AC2": "GwetAC2"}.get(self.name, "BrennanPrediger")
        return f"{cls}({', '.join(parts)})"


@dataclass(frozen=True, repr=False)
class PercentAgreement(ResultMixin):
    """Share of agreeing pairs of answers, averaged over items (see :func:`percent_agreement`)."""

    value: float
    n_items: int
    note: str = ""

    def __repr__(self) -> str:
        note = f", note={self.note!r}" if self.note else ""
        return f"PercentAgreement(value={fmt(self.value)}, n_items={self.n_items}{note})"


def gwet_weights(domain: Sequence[float], weights: str = "identity") -> np.ndarray:
    """K x K agreement weights as defined by Gwet (2014, ch. 3) and the irrCAC package.

    With codes x (the domain values, sorted) and x_min, x_max: identity [k == l]; linear
    1 - |x_k - x_l| / (x_max - x_min); quadratic 1 - (x_k - x_l)^2 / (x_max - x_min)^2; ordinal
    1 - M_kl / max M with M_kl = C(|k - l| + 1, 2) on positions; radical 1 - sqrt|x_k - x_l| /
    sqrt(x_max - x_min); ratio 1 - ((x_k - x_l)/(x_k + x_l))^2 / ((x_max - x_min)/(x_max + x_min))^2;
    circular 1 - s_kl / max s with s_kl = sin^2(pi (x_k - x_l) / (x_max - x_min + 1)); bipolar
    1 - b_kl / max b with b_kl = (x_k - x_l)^2 / ((x_k + x_l - 2 x_min)(2 x_max - x_k - x_l)), b_kk = 0.
    Linear and quadratic use code values (irrCAC), unlike Cohen's kappa weights, which use positions.

    >>> gwet_weights([1, 2, 3], "quadratic").tolist()
    [[1.0, 0.75, 0.0], [0.75, 1.0, 0.75], [0.0, 0.75, 1.0]]
    """
    if weights not in GWET_WEIGHTS:
        raise AgreementInputError(f"weights must be one of {', '.join(GWET_WEIGHTS)}; got {weights!r}")
    x = np.asarray(sorted(float(d) for d in domain))
    q = len(x)
    if weights == "identity" or q < 2:
        return np.eye(q)
    xk, xl = x[:, None], x[None, :]
    lo, hi = x[0], x[-1]
    if weights == "linear":
        return 1 - np.abs(xk - xl) / (hi - lo)
    if weights == "quadratic":
        return 1 - ((xk - xl) / (hi - lo)) ** 2
    if weights == "radical":
        return 1 - np.sqrt(np.abs(xk - xl)) / np.sqrt(hi - lo)
    if weights == "ratio":
        if (x <= 0).any():
            raise AgreementInputError("ratio weights need positive codes (a code of 0 or less divides by 0)")
        return 1 - ((xk - xl) / (xk + xl)) ** 2 / ((hi - lo) / (hi + lo)) ** 2
    if weights == "ordinal":
        idx = np.arange(q)
        span = np.abs(idx[:, None] - idx[None, :]) + 1
        raw = span * (span - 1) / 2
    elif weights == "circular":
        raw = np.sin(np.pi * (xk - xl) / (hi - lo + 1)) ** 2
    else:  # bipolar
        with np.errstate(divide="ignore", invalid="ignore"):
            raw = (xk - xl) ** 2 / ((xk + xl - 2 * lo) * (2 * hi - xk - xl))
        raw[np.eye(q, dtype=bool)] = 0.0
    return 1 - raw / raw.max()


def _item_counts(data: Any, domain: Sequence | None):
    m = as_matrix(data)
    dom = resolve_domain(m.values, domain)
    counts = (m.values.T[:, :, None] == dom[None, None, :]).sum(axis=1).astype(float)   # (items, K)
    return m, dom, counts[counts.sum(axis=1) > 0]          # items nobody answered are left out


def _agreement(counts: np.ndarray, w: np.ndarray):
    """Per-item weighted agreement p_a|i (0 where r_i < 2), r_i and the mask r_i >= 2."""
    r = counts.sum(axis=1)
    weighted = counts @ w.T                                  # r*_ik = sum_l w_kl r_il
    two = r >= 2
    denom = np.where(two, r * (r - 1), 1.0)
    pa_i = np.where(two, (counts * (weighted - 1)).sum(axis=1) / denom, 0.0)
    return pa_i, r, two


def _coefficient(data: Any, domain: Sequence | None, weights: str, ci: float, name: str,
                 chance: str) -> ChanceCorrected:
    if not 0 < ci < 1:
        raise AgreementInputError(f"ci must be between 0 and 1 (e.g. 0.95); got {ci!r}")
    m, dom, counts = _item_counts(data, domain)
    w = gwet_weights(dom, weights)
    q, n = len(dom), counts.shape[0]
    nan = float("nan")

    def undefined(note: str, p_a: float = nan, p_e: float = nan) -> ChanceCorrected:
        return ChanceCorrected(coefficient=nan, se=nan, ci_low=nan, ci_high=nan, p_a=p_a, p_e=p_e,
                               p_value=nan, n_items=n, name=name, weights=weights, ci=ci, note=note)

    if m.shape[0] < 2:
        return undefined(f"{name} is undefined: there is only one judge")
    pa_i, r, two = _agreement(counts, w)
    n2 = int(two.sum())
    if n2 == 0:
        return undefined(f"{name} is undefined: no item was answered by two or more judges")
    p_a = float(pa_i[two].sum() / n2)
    if q < 2:
        return undefined(f"{name} is undefined: only one category is offered", p_a=p_a)
    pi = (counts / r[:, None]).mean(axis=0)                 # pi_k over the n answered items
    t_w = float(w.sum())
    if chance == "gwet":
        p_e = t_w * float((pi * (1 - pi)).sum()) / (q * (q - 1))
        pe_i = (t_w / (q * (q - 1))) * (counts @ (1 - pi)) / r
    else:                                                    # Brennan & Prediger (1981)
        p_e = t_w / q ** 2
        pe_i = None
    if not 1 - p_e > 1e-12:
        return undefined(f"{name} is undefined: chance agreement is 1", p_a=p_a, p_e=p_e)
    coef = (p_a - p_e) / (1 - p_e)
    coef_i = (n / n2) * (pa_i - p_e * two) / (1 - p_e)
    if pe_i is not None:
        coef_i = coef_i - 2 * (1 - coef) * (pe_i - p_e) / (1 - p_e)
    note = ""
    if n < 2:
        se = nan
        note = f"the standard error of {name} is undefined with a single item"
    else:
        se = float(np.sqrt(((coef_i - coef) ** 2).sum() / (n * (n - 1))))
    if np.isfinite(se) and se > 0:
        half = stats.t.ppf(0.5 + ci / 2, n - 1) * se
        low, high = coef - half, min(1.0, coef + half)
        p_value = float(2 * stats.t.sf(abs(coef / se), n - 1))
    elif se == 0:
        low = high = coef
        p_value = 0.0 if coef != 0 else nan
    else:
        low = high = p_value = nan
    return ChanceCorrected(coefficient=float(coef), se=se, ci_low=float(low), ci_high=float(high),
                           p_a=p_a, p_e=float(p_e), p_value=p_value, n_items=n, name=name,
                           weights=weights, ci=ci, note=note)


_SE_TEXT = """
    Standard error conditional on the sample of judges (Gwet 2008, eq. for V(AC1); Gwet 2014), as irrCAC
    computes it: with n answered items, n2 of them answered by two or more judges,
    c_i = (n / n2) (p_a|i - p_e [r_i >= 2]) / (1 - p_e) - 2 (1 - c) (p_e|i - p_e) / (1 - p_e),
    p_e|i = T_w / (q (q - 1)) * sum_k r_ik (1 - pi_k) / r_i, and Var = sum_i (c_i - c)^2 / (n (n - 1))
    (finite-population correction f = 0). Interval: c +/- t_{n-1} se, upper limit capped at 1 (irrCAC);
    ``p_value`` two-sided from the t distribution with n - 1 degrees of freedom."""


def gwet_ac1(data: Any, *, domain: Sequence | None = None, ci: float = 0.95) -> ChanceCorrected:
    """Gwet's AC1 (Gwet 2008) for judges x items data; missing answers allowed.

    p_a = mean over items with r_i >= 2 answers of sum_k r_ik (r_ik - 1) / (r_i (r_i - 1));
    pi_k = mean over answered items of r_ik / r_i; p_e = sum_k pi_k (1 - pi_k) / (q - 1) with q the
    number of codes in ``domain``; AC1 = (p_a - p_e) / (1 - p_e).
    {se}

    Interpretation: AC1 resists the kappa paradoxes (Feinstein & Cicchetti 1990): with skewed answers
    (most items rated relevant) kappa and alpha can be low while judges nearly always agree; report AC1,
    percent agreement and the category shares beside them. Bands: :func:`labelstudy.agreement.bands.band`.
    Validated against the irrCAC package (``irrCAC.raw.CAC(...).gwet()``) on random designs with missing
    answers, and against the benchmarking vignette of Gwet's irrCAC (AC1 .7754, SE .1430).

    >>> nan = float("nan")
    >>> data = [[1, 2, 3, 3, 2, 1, 4, 1, 2, nan, nan, nan],
    ...         [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, nan, 3],
    ...         [nan, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, nan],
    ...         [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, nan]]
    >>> r = gwet_ac1(data)
    >>> round(r.coefficient, 4), round(r.se, 5), round(r.p_a, 4), round(r.p_e, 4)
    (0.7754, 0.14295, 0.8182, 0.1903)
    """
    return _coefficient(data, domain, "identity", ci, "AC1", "gwet")


def gwet_ac2(data: Any, *, weights: str = "quadratic", domain: Sequence | None = None,
             ci: float = 0.95) -> ChanceCorrected:
    """Gwet's AC2 (Gwet 2014): AC1 with agreement weights for ordered categories.

    p_a replaces the second r_ik by r*_ik = sum_l w_kl r_il; p_e = T_w / (q (q - 1)) * sum pi_k (1 - pi_k),
    T_w = sum of the weights (:func:`gwet_weights`, ``weights`` one of {weights}). AC2 with identity
    weights equals AC1.
    {se}

    Validated against irrCAC (``CAC(..., weights=...).gwet()``) for every weight scheme on random designs.

    >>> round(gwet_ac2([[1, 2, 3, 3], [1, 2, 4, 3], [2, 2, 3, 3]]).coefficient, 4)
    0.8925
    """
    return _coefficient(data, domain, weights, ci, "AC2" if weights != "identity" else "AC1", "gwet")


def brennan_prediger(data: Any, *, domain: Sequence | None = None, ci: float = 0.95) -> ChanceCorrected:
    """Brennan & Prediger's (1981) coefficient: chance agreement 1/q for q offered categories.

    BP = (p_a - 1/q) / (1 - 1/q), with p_a as in :func:`gwet_ac1` and q = len(domain): declare the full
    domain, since unused categories lower the chance agreement. Standard error as irrCAC's ``bp()``:
    Var = sum_i (b_i - BP)^2 / (n (n - 1)), b_i = (n / n2) (p_a|i - p_e [r_i >= 2]) / (1 - p_e); t interval
    as for AC1 (two-sided p, where irrCAC prints a one-sided one).
    Validated against irrCAC (``CAC(...).bp()``); the Krippendorff (2011) matrix gives .7727.

    >>> nan = float("nan")
    >>> data = [[1, 2, 3, 3, 2, 1, 4, 1, 2, nan, nan, nan],
    ...         [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, nan, 3],
    ...         [nan, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, nan],
    ...         [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, nan]]
    >>> round(brennan_prediger(data).coefficient, 4)
    0.7727
    """
    return _coefficient(data, domain, "identity", ci, "Brennan-Prediger", "uniform")


def percent_agreement(data: Any) -> PercentAgreement:
    """Percent agreement: the mean over items with two or more answers of the share of agreeing pairs.

    p_a = (1 / n2) sum_i sum_k r_ik (r_ik - 1) / (r_i (r_i - 1)) (the p_a of Fleiss 1971 and Gwet 2008;
    for two judges the share of items they agree on). No chance correction.
    Validated against irrCAC's ``pa`` on random designs.

    >>> round(percent_agreement([[1, 2, 3, 1], [1, 2, 1, None], [1, 3, 3, 2]]).value, 4)
    0.4167
    """
    m, dom, counts = _item_counts(data, None)
    if counts.size == 0:
        return PercentAgreement(value=float("nan"), n_items=0, note="no answers")
    pa_i, _, two = _agreement(counts, np.eye(len(dom)))
    if not two.any():
        return PercentAgreement(value=float("nan"), n_items=0,
                                note="percent agreement is undefined: no item was answered by two judges")
    return PercentAgreement(value=float(pa_i[two].mean()), n_items=int(two.sum()))


gwet_ac1.__doc__ = gwet_ac1.__doc__.replace("{se}", _SE_TEXT)
gwet_ac2.__doc__ = gwet_ac2.__doc__.replace("{se}", _SE_TEXT).replace("{weights}", ", ".join(GWET_WEIGHTS))
