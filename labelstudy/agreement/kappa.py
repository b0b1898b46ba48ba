"""Kappa coefficients: Cohen's (weighted) kappa with Fleiss-Cohen-Everitt standard errors, pairwise and
Light's kappa for many judges, and Fleiss' kappa with its per-category kappas.

Data convention: judges x items (rows judges, columns items, NaN = no answer). Categories are the codes of
``domain`` (default: the sorted observed codes), so an unused category still counts in weighted kappa.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
import pandas as pd
from scipy import stats

from labelstudy.agreement._data import AgreementInputError, as_matrix, resolve_domain
from labelstudy.agreement._results import ResultMixin, fmt, fmt_ci

__all__ = ["CohenKappa", "FleissKappa", "LightKappa", "cohen_kappa", "fleiss_kappa", "kappa_weights",
           "light_kappa", "pairwise_kappa"]

WEIGHTS = (None, "linear", "quadratic")


@dataclass(frozen=True, repr=False)
class CohenKappa(ResultMixin):
    """Cohen's kappa for two judges (see :func:`cohen_kappa`)."""

    kappa: float
    se: float
    se0: float
    ci_low: float
    ci_high: float
    z: float
    p_value: float
    p_o: float
    p_e: float
    n: int
    weights: str = "none"
    ci: float = 0.95
    note: str = ""

    def __repr__(self) -> str:
        extra = f", {fmt_ci(self.ci_low, self.ci_high, self.ci)}" if np.isfinite(self.ci_low) else ""
        note = f", note={self.note!r}" if self.note else ""
        return (f"CohenKappa(kappa={fmt(self.kappa)}, weights={self.weights!r}, se={fmt(self.se)}"
                f"{extra}, p={fmt(self.p_value, 4)}, n={self.n}{note})")


@dataclass(frozen=True, repr=False)
class LightKappa(ResultMixin):
    """Light's (1971) kappa: the mean of the pairwise Cohen's kappas (see :func:`light_kappa`)."""

    kappa: float
    n_pairs: int
    weights: str = "none"
    note: str = ""

    def __repr__(self) -> str:
        note = f", note={self.note!r}" if self.note else ""
        return f"LightKappa(kappa={fmt(self.kappa)}, n_pairs={self.n_pairs}{note})"


@dataclass(frozen=True, repr=False)
class FleissKappa(ResultMixin):
    """Fleiss' (1971) kappa for many judges (see :func:`fleiss_kappa`)."""

    kappa: float
    se0: float
    z: float
    p_value: float
    p_o: float
    p_e: float
    per_category: pd.Series
    n_items: int = 0
    n_judges: int = 0
    note: str = ""

    def __repr__(self) -> str:
        note = f", note={self.note!r}" if self.note else ""
        return (f"FleissKappa(kappa={fmt(self.kappa)}, se0={fmt(self.se0)}, p={fmt(self.p_value, 4)}, "
                f"n_items={self.n_items}, n_judges={self.n_judges}{note})")


# --------------------------------------------------------------------------------------------- helpers

def kappa_weights(k: int, weights: str | None = None) -> np.ndarray:
    """K x K agreement weights over category positions 0..K-1 (Cohen 1968).

    identity (``None``) ``[i == j]``; ``"linear"`` 1 - |i - j| / (K - 1); ``"quadratic"``
    1 - (i - j)^2 / (K - 1)^2. Positions, not code values, as in scikit-learn and statsmodels.

    >>> kappa_weights(3, "linear").tolist()
    [[1.0, 0.5, 0.0], [0.5, 1.0, 0.5], [0.0, 0.5, 1.0]]
    """
    if weights not in WEIGHTS:
        raise AgreementInputError(f"weights must be None, 'linear' or 'quadratic'; got {weights!r}")
    idx = np.arange(k)
    if weights is None or k < 2:
        return np.eye(k)
    diff = np.abs(idx[:, None] - idx[None, :]) / (k - 1)
    return 1 - diff if weights == "linear" else 1 - diff ** 2


def _kappa_tables(tables: np.ndarray, w: np.ndarray):
    """Kappa and its FCE (1969) variances for a (B, K, K) batch of contingency tables."""
    n = tables.sum(axis=(1, 2))
    with np.errstate(divide="ignore", invalid="ignore"):
        p = tables / n[:, None, None]
        r, c = p.sum(axis=2), p.sum(axis=1)                         # p_i. and p_.j
        p_o = (w * p).sum(axis=(1, 2))
        p_e = (w * r[:, :, None] * c[:, None, :]).sum(axis=(1, 2))
        kappa = (p_o - p_e) / (1 - p_e)
        w_row = c @ w.T                                              # wbar_i. = sum_j p_.j w_ij
        w_col = r @ w                                                # wbar_.j = sum_i p_i. w_ij
        w_sum = w_row[:, :, None] + w_col[:, None, :]
        one_k = (1 - kappa)[:, None, None]
        var = ((p * (w - w_sum * one_k) ** 2).sum(axis=(1, 2))
               - (kappa - p_e * (1 - kappa)) ** 2) / (n * (1 - p_e) ** 2)
        var0 = (((r[:, :, None] * c[:, None, :]) * (w - w_sum) ** 2).sum(axis=(1, 2))
                - p_e ** 2) / (n * (1 - p_e) ** 2)
    undefined = ~(1 - p_e > 1e-12) | (n < 1)
    for arr in (kappa, var, var0):
        arr[undefined] = np.nan
    return kappa, np.maximum(var, 0.0), np.maximum(var0, 0.0), p_o, p_e, n


def _one_hot(values: np.ndarray, dom: np.ndarray) -> np.ndarray:
    """(n_judges, n_items, K) indicator of each judge's code per item (all zero where missing)."""
    return (values[:, :, None] == dom[None, None, :]).astype(float)


# ------------------------------------------------------------------------------------------ main API

def cohen_kappa(a: Sequence, b: Sequence, *, weights: str | None = None, domain: Sequence | None = None,
                ci: float = 0.95) -> CohenKappa:
    """Cohen's kappa (Cohen 1960) or weighted kappa (Cohen 1968) of two judges' answers to the same items.

    kappa = (p_o - p_e) / (1 - p_e) with p_o = sum w_ij p_ij and p_e = sum w_ij p_i. p_.j over the full
    ``domain`` (weights of :func:`kappa_weights`). Items where either judge gave no answer are dropped.

    Standard errors: Fleiss, Cohen & Everitt (1969), "Large sample standard errors of kappa and weighted
    kappa". With wbar_i. = sum_j p_.j w_ij and wbar_.j = sum_i p_i. w_ij,
    Var = {sum p_ij [w_ij - (wbar_i. + wbar_.j)(1 - kappa)]^2 - [kappa - p_e (1 - kappa)]^2} / [n (1 - p_e)^2]
    gives ``se`` and the normal interval at level ``ci``; Var0 = {sum p_i. p_.j [w_ij - (wbar_i. +
    wbar_.j)]^2 - p_e^2} / [n (1 - p_e)^2] gives ``se0``, ``z = kappa / se0`` and the **two-sided** normal
    ``p_value`` for H0: kappa = 0.

    Interpretation: see :func:`labelstudy.agreement.bands.band` (Landis & Koch 1977).
    Validated against ``sklearn.metrics.cohen_kappa_score`` (all three weightings, ``labels=`` the domain)
    and ``statsmodels.stats.inter_rater.cohens_kappa`` (kappa, std_kappa, std_kappa0), and the SAS
    example reproduced in statsmodels' tests (kappa .4842, SE .1380, SE0 .1484).

    SAS example (table rows (0,4,1) (0,8,0) (0,1,5), n = 19):

    >>> a = [0] * 5 + [1] * 8 + [2] * 6
    >>> b = [1, 1, 1, 1, 2] + [1] * 8 + [1, 2, 2, 2, 2, 2]
    >>> r = cohen_kappa(a, b, domain=[0, 1, 2])
    >>> round(r.kappa, 4), round(r.se, 4), round(r.se0, 4)
    (0.4842, 0.138, 0.1484)
    """
    if not 0 < ci < 1:
        raise AgreementInputError(f"ci must be between 0 and 1 (e.g. 0.95); got {ci!r}")
    if len(a) != len(b):
        raise AgreementInputError(f"the two judges answered different numbers of items ({len(a)} and "
                                  f"{len(b)}); give one entry per item, NaN for no answer")
    m = as_matrix([list(a), list(b)], name="answers")
    dom = resolve_domain(m.values, domain, name="answers")
    w = kappa_weights(len(dom), weights)
    both = ~np.isnan(m.values).any(axis=0)
    x = _one_hot(m.values[:, both], dom)
    table = x[0].T @ x[1]
    kappa, var, var0, p_o, p_e, n = (v[0] for v in _kappa_tables(table[None], w))
    wname = weights or "none"
    nan = float("nan")
    if n < 1:
        return CohenKappa(kappa=nan, se=nan, se0=nan, ci_low=nan, ci_high=nan, z=nan, p_value=nan,
                          p_o=nan, p_e=nan, n=0, weights=wname, ci=ci,
                          note="kappa is undefined: no item was answered by both judges")
    if not np.isfinite(kappa):
        return CohenKappa(kappa=nan, se=nan, se0=nan, ci_low=nan, ci_high=nan, z=nan, p_value=nan,
                          p_o=float(p_o), p_e=float(p_e), n=int(n), weights=wname, ci=ci,
                          note="kappa is undefined: chance agreement is 1 (both judges used one category)")
    se, se0 = float(np.sqrt(var)), float(np.sqrt(var0))
    half = stats.norm.ppf(0.5 + ci / 2) * se
    z = kappa / se0 if se0 > 0 else (np.inf * np.sign(kappa) if kappa else nan)
    p_value = float(2 * stats.norm.sf(abs(z))) if np.isfinite(z) or np.isinf(z) else nan
    return CohenKappa(kappa=float(kappa), se=se, se0=se0, ci_low=float(kappa - half),
                      ci_high=float(kappa + half), z=float(z), p_value=p_value, p_o=float(p_o),
                      p_e=float(p_e), n=int(n), weights=wname, ci=ci)


def pairwise_kappa(data: Any, *, weights: str | None = None, domain: Sequence | None = None,
                   min_items: int = 2) -> pd.DataFrame:
    """Judges x judges table of Cohen's kappa for every pair of judges on their common items.

    Same formula as :func:`cohen_kappa` (Cohen 1960, 1968), computed for all pairs at once: the
    contingency tables of all pairs come from one matrix product of the judges' indicator matrices. The
    diagonal is 1.0; a pair with fewer than ``min_items`` common items, or whose kappa is undefined
    (chance agreement 1), is NaN. Validated against :func:`cohen_kappa` pair by pair.

    >>> pairwise_kappa([[1, 2, 1, 2], [1, 2, 2, 2], [1, 2, 1, 2]]).round(2).to_numpy().tolist()
    [[1.0, 0.5, 1.0], [0.5, 1.0, 0.5], [1.0, 0.5, 1.0]]
    """
    m = as_matrix(data)
    dom = resolve_domain(m.values, domain)
    k, n_j = len(dom), m.shape[0]
    w = kappa_weights(k, weights)
    if k == 0 or m.shape[1] == 0:                 # no answers at all: every pair is undefined
        out = np.full((n_j, n_j), np.nan)
        np.fill_diagonal(out, 1.0)
        return pd.DataFrame(out, index=pd.Index(m.judges, name="judge"),
                            columns=pd.Index(m.judges, name="judge"))
    x = _one_hot(m.values, dom)                                          # (J, I, K)
    flat = x.transpose(0, 2, 1).reshape(n_j * k, -1)                     # (J*K, I)
    tables = (flat @ flat.T).reshape(n_j, k, n_j, k).transpose(0, 2, 1, 3).reshape(n_j * n_j, k, k)
    kappa, _, _, _, _, n = _kappa_tables(tables, w)
    kappa[n < max(min_items, 1)] = np.nan
    out = kappa.reshape(n_j, n_j)
    np.fill_diagonal(out, 1.0)
    return pd.DataFrame(out, index=pd.Index(m.judges, name="judge"), columns=pd.Index(m.judges, name="judge"))


def light_kappa(data: Any, *, weights: str | None = None, domain: Sequence | None = None) -> LightKappa:
    """Light's (1971) kappa: the mean of Cohen's kappa over all pairs of judges.

    kappa_Light = (2 / (J (J - 1))) * sum_{a < b} kappa_ab, using :func:`pairwise_kappa` on each pair's
    common items. Pairs whose kappa is undefined are left out of the mean (``n_pairs`` counts the pairs
    used, ``note`` says how many were left out). Validated against a loop of :func:`cohen_kappa` calls.

    >>> light_kappa([[1, 2, 1, 2], [1, 2, 2, 2], [1, 2, 1, 2]]).kappa
    0.6666666666666666
    """
    table = pairwise_kappa(data, weights=weights, domain=domain)
    n_j = table.shape[0]
    upper = table.to_numpy()[np.triu_indices(n_j, k=1)]
    used = upper[np.isfinite(upper)]
    wname = weights or "none"
    if n_j < 2:
        return LightKappa(kappa=float("nan"), n_pairs=0, weights=wname,
                          note="kappa is undefined: there is only one judge")
    if used.size == 0:
        return LightKappa(kappa=float("nan"), n_pairs=0, weights=wname,
                          note="kappa is undefined for every pair of judges (too few common items or "
                               "no variation)")
    left = upper.size - used.size
    note = f"{left} of {upper.size} pairs of judges had an undefined kappa and were left out" if left else ""
    return LightKappa(kappa=float(used.mean()), n_pairs=int(used.size), weights=wname, note=note)


def fleiss_kappa(data: Any, *, domain: Sequence | None = None) -> FleissKappa:
    """Fleiss' (1971) kappa, "Measuring nominal scale agreement among many raters".

    With N items, n answers per item and n_ij answers of category j for item i:
    p_j = sum_i n_ij / (N n); P_i = sum_j n_ij (n_ij - 1) / (n (n - 1)); p_o = mean P_i;
    p_e = sum p_j^2; kappa = (p_o - p_e) / (1 - p_e). Per-category kappa (Fleiss 1971):
    kappa_j = 1 - sum_i n_ij (n - n_ij) / (N n (n - 1) p_j q_j), q_j = 1 - p_j.

    Standard error under H0 kappa = 0 (Fleiss, Nee & Landis 1979, "Large sample variance of kappa in the
    case of different sets of raters"):
    se0 = sqrt(2) / (sum p_j q_j sqrt(N n (n - 1))) * sqrt((sum p_j q_j)^2 - sum p_j q_j (q_j - p_j));
    ``z = kappa / se0`` and a two-sided normal ``p_value``.

    Every item needs the same number of answers (the judges may differ between items); otherwise an
    AgreementInputError points to Krippendorff's alpha or Gwet's AC1. Items nobody answered are dropped.
    Validated against ``statsmodels.stats.inter_rater.fleiss_kappa`` and Fleiss' (1971) diagnoses data
    (kappa .4302).

    >>> counts = [(0, 0, 0, 0, 14), (0, 2, 6, 4, 2), (0, 0, 3, 5, 6), (0, 3, 9, 2, 0), (2, 2, 8, 1, 1),
    ...           (7, 7, 0, 0, 0), (3, 2, 6, 3, 0), (2, 5, 3, 2, 2), (6, 5, 2, 1, 0), (0, 2, 2, 3, 7)]
    >>> data = np.array([np.repeat(np.arange(1, 6), row) for row in counts]).T   # 14 judges x 10 items
    >>> round(fleiss_kappa(data).kappa, 4)
    0.2099
    """
    m = as_matrix(data)
    dom = resolve_domain(m.values, domain)
    answered = ~np.isnan(m.values)
    keep = answered.any(axis=0)
    counts = _one_hot(m.values[:, keep], dom).sum(axis=0)               # (N, K)
    per_item = counts.sum(axis=1)
    labels = pd.Index([int(d) if float(d).is_integer() else float(d) for d in dom], name="category")
    nan = float("nan")
    empty = pd.Series(np.full(len(dom), nan), index=labels, name="kappa")
    dropped = int((~keep).sum())
    note = f"{dropped} item(s) nobody answered were left out" if dropped else ""
    if per_item.size == 0:
        return FleissKappa(kappa=nan, se0=nan, z=nan, p_value=nan, p_o=nan, p_e=nan, per_category=empty,
                           note="kappa is undefined: no answers")
    if np.unique(per_item).size > 1:
        lo, hi = int(per_item.min()), int(per_item.max())
        raise AgreementInputError(
            f"Fleiss' kappa needs the same number of answers for every item, but items have between {lo} "
            f"and {hi}; use Krippendorff's alpha or Gwet's AC1, which allow missing answers")
    n, n_items = int(per_item[0]), counts.shape[0]
    if n < 2:
        return FleissKappa(kappa=nan, se0=nan, z=nan, p_value=nan, p_o=nan, p_e=nan, per_category=empty,
                           n_items=n_items, n_judges=n,
                           note="kappa is undefined: each item has only one answer")
    p_j = counts.sum(axis=0) / (n_items * n)
    q_j = 1 - p_j
    p_o = float(((counts * (counts - 1)).sum(axis=1) / (n * (n - 1))).mean())
    p_e = float((p_j ** 2).sum())
    with np.errstate(divide="ignore", invalid="ignore"):
        per_cat = 1 - (counts * (n - counts)).sum(axis=0) / (n_items * n * (n - 1) * p_j * q_j)
    per_cat[~(p_j * q_j > 0)] = nan
    per_category = pd.Series(per_cat, index=labels, name="kappa")
    pq = float((p_j * q_j).sum())
    if not pq > 1e-12:
        return FleissKappa(kappa=nan, se0=nan, z=nan, p_value=nan, p_o=p_o, p_e=p_e,
                           per_category=per_category, n_items=n_items, n_judges=n,
                           note="kappa is undefined: every judge gave the same answer")
    kappa = (p_o - p_e) / (1 - p_e)
    inner = pq ** 2 - float((p_j * q_j * (q_j - p_j)).sum())
    se0 = float(np.sqrt(2) / (pq * np.sqrt(n_items * n * (n - 1))) * np.sqrt(max(inner, 0.0)))
    z = kappa / se0 if se0 > 0 else nan
    p_value = float(2 * stats.norm.sf(abs(z))) if np.isfinite(z) else nan
    return FleissKappa(kappa=float(kappa), se0=se0, z=float(z), p_value=p_value, p_o=p_o, p_e=p_e,
                       per_category=per_category, n_items=n_items, n_judges=n, note=note)
