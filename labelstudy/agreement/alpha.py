"""Krippendorff's alpha with vectorised bootstrap intervals.

Notation follows Krippendorff (2011), "Computing Krippendorff's Alpha-Reliability": ``o`` the coincidence
matrix (o_ck), ``n_c`` its margins, ``n`` the number of pairable values, ``d2`` the squared metric
differences (delta^2_ck). Data are judges x items (rows judges, columns items, NaN = no answer).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import krippendorff
import numpy as np
import pandas as pd

from labelstudy.agreement._data import AgreementInputError, as_matrix, resolve_domain
from labelstudy.agreement._results import ResultMixin, fmt, fmt_ci

__all__ = ["KrippendorffAlpha", "LEVELS", "alpha_replicates", "coincidences", "distance_matrix",
           "krippendorff_alpha", "unit_bootstrap_indices"]

LEVELS = ("nominal", "ordinal", "interval", "ratio")
METHODS = ("units", "pairs")


@dataclass(frozen=True, repr=False)
class KrippendorffAlpha(ResultMixin):
    """Krippendorff's alpha with an optional bootstrap interval (see :func:`krippendorff_alpha`)."""

    alpha: float
    ci_low: float
    ci_high: float
    q_below_min: float
    level: str
    method: str
    n_boot: int
    n_units: int
    n_pairable: int
    note: str = ""
    ci: float = 0.95
    alpha_min: float = 0.667
    n_boot_undefined: int = 0

    def __repr__(self) -> str:
        parts = [f"alpha={fmt(self.alpha)}", f"level={self.level!r}"]
        interval = fmt_ci(self.ci_low, self.ci_high, self.ci)
        if interval:
            parts.append(f"{interval} by {self.method} bootstrap")
        parts.append(f"n_units={self.n_units}")
        if self.note and not np.isfinite(self.alpha):
            parts.append(f"note={self.note!r}")
        return f"KrippendorffAlpha({', '.join(parts)})"


# --------------------------------------------------------------------------------------------- helpers

def _check_level(level: str) -> None:
    if level not in LEVELS:
        raise AgreementInputError(f"level must be one of {', '.join(LEVELS)}; got {level!r}")


def _value_counts(values: np.ndarray, dom: np.ndarray) -> np.ndarray:
    """(n_items, K) number of judges giving each code to each item."""
    return (values.T[:, :, None] == dom[None, None, :]).sum(axis=1).astype(float)


def _unit_coincidences(counts: np.ndarray) -> np.ndarray:
    """(n_items, K*K) coincidences of every unit: (c c' - diag c) / (m_u - 1); zero for m_u < 2."""
    n_items, k = counts.shape
    m_u = counts.sum(axis=1)
    pairs = counts[:, :, None] * counts[:, None, :]
    pairs[:, np.arange(k), np.arange(k)] -= counts
    scale = np.where(m_u >= 2, 1.0 / np.maximum(m_u - 1, 1), 0.0)
    return (pairs * scale[:, None, None]).reshape(n_items, k * k)


def distance_matrix(domain: Sequence[float], level: str, n_c: Sequence[float] | None = None) -> np.ndarray:
    """The K x K squared metric differences delta^2_ck of Krippendorff (2011).

    nominal ``[c != k]``; interval ``(c - k)^2``; ratio ``((c - k) / (c + k))^2`` (0 where c + k = 0, as
    the krippendorff package does); ordinal ``(sum_{g=c..k} n_g - (n_c + n_k) / 2)^2``, which needs the
    margins ``n_c`` of the coincidence matrix. ``n_c`` may also be a (B, K) batch, giving (B, K, K).

    >>> distance_matrix([1, 2, 3], "ordinal", n_c=[2, 1, 1]).tolist()
    [[0.0, 2.25, 6.25], [2.25, 0.0, 1.0], [6.25, 1.0, 0.0]]
    """
    _check_level(level)
    dom = np.asarray(domain, dtype=float)
    c, k = dom[:, None], dom[None, :]
    if level == "nominal":
        return (c != k).astype(float)
    if level == "interval":
        return (c - k) ** 2
    if level == "ratio":
        total = c + k
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(total != 0, ((c - k) / np.where(total != 0, total, 1.0)) ** 2, 0.0)
    if n_c is None:
        raise AgreementInputError("the ordinal metric needs the category margins n_c")
    n_c = np.asarray(n_c, dtype=float)
    batch = n_c.reshape(-1, n_c.shape[-1])
    prefix = np.concatenate([np.zeros((batch.shape[0], 1)), np.cumsum(batch, axis=1)], axis=1)
    idx = np.arange(batch.shape[1])
    lo, hi = np.minimum.outer(idx, idx), np.maximum.outer(idx, idx)
    between = prefix[:, hi + 1] - prefix[:, lo]
    d2 = (between - (batch[:, :, None] + batch[:, None, :]) / 2) ** 2
    return d2[0] if n_c.ndim == 1 else d2


def _alpha_from_o(o: np.ndarray, dom: np.ndarray, level: str) -> np.ndarray:
    """Alpha for a (B, K, K) batch of coincidence matrices: 1 - (n - 1) sum o d2 / sum n_c n_k d2."""
    n_c = o.sum(axis=2)
    n = n_c.sum(axis=1)
    d2 = distance_matrix(dom, level, n_c) if level == "ordinal" else distance_matrix(dom, level)[None]
    observed = (o * d2).sum(axis=(1, 2))
    expected = (n_c[:, :, None] * n_c[:, None, :] * d2).sum(axis=(1, 2))
    with np.errstate(divide="ignore", invalid="ignore"):
        out = 1.0 - (n - 1.0) * observed / expected
    out[~(expected > 0)] = np.nan
    return out


def _prepare(data: Any, domain: Sequence | None, level: str):
    m = as_matrix(data)
    dom = resolve_domain(m.values, domain)
    if level == "ratio" and (dom < 0).any():
        raise AgreementInputError("the ratio level needs non-negative codes (a true zero); use interval")
    return m, dom, _value_counts(m.values, dom)


def coincidences(data: Any, domain: Sequence | None = None) -> pd.DataFrame:
    """The K x K coincidence matrix o_ck of judges x items ``data`` (Krippendorff 2011).

    o_ck = sum over units u with m_u >= 2 answers of (number of c-k pairs in u) / (m_u - 1). Rows and
    columns are the codes of ``domain``; row sums are n_c and the total is n, the pairable values.

    >>> data = [[1, 2, 2], [1, 2, None], [None, 3, 2]]
    >>> coincidences(data).to_numpy().tolist()
    [[2.0, 0.0, 0.0], [0.0, 3.0, 1.0], [0.0, 1.0, 0.0]]
    """
    m, dom, counts = _prepare(data, domain, "nominal")
    k = len(dom)
    o = _unit_coincidences(counts).sum(axis=0).reshape(k, k)
    labels = [int(d) if float(d).is_integer() else float(d) for d in dom]
    return pd.DataFrame(o, index=pd.Index(labels, name="c"), columns=pd.Index(labels, name="k"))


def unit_bootstrap_indices(data: Any, n_boot: int, seed: int | None = None) -> np.ndarray:
    """(n_boot, n_units) column indices of ``data`` resampled with replacement among the pairable items.

    These are exactly the resamples :func:`krippendorff_alpha` uses with ``method="units"`` and the same
    ``seed`` (numpy ``default_rng(seed)``), so a slow reference loop can be run on the same draws.

    >>> unit_bootstrap_indices([[1, 2, 1], [1, None, 2]], 3, seed=1).shape
    (3, 2)
    """
    if int(n_boot) != n_boot or n_boot < 0:
        raise AgreementInputError(f"n_boot must be a whole number >= 0; got {n_boot!r}")
    n_boot = int(n_boot)
    m = as_matrix(data)
    pairable = np.flatnonzero((~np.isnan(m.values)).sum(axis=0) >= 2)
    rng = np.random.default_rng(seed)
    if pairable.size == 0:
        return np.zeros((n_boot, 0), dtype=int)
    return pairable[rng.integers(0, pairable.size, size=(n_boot, pairable.size))]


def alpha_replicates(data: Any, level: str = "nominal", *, domain: Sequence | None = None,
                     indices: np.ndarray) -> np.ndarray:
    """Alpha of every resample of items: row b of ``indices`` lists the item columns of replicate b.

    Vectorised: per-unit coincidences (n_items, K*K) are computed once; the replicate weight matrix
    (n_boot, n_items) counts how often each item was drawn, and one matrix product gives every replicate's
    coincidence matrix. Observed and expected disagreement (and, for ordinal data, the metric) are
    recomputed from each replicate's own coincidences, as a fresh call of the krippendorff package on the
    resampled columns would. Replicates without variation give NaN.

    >>> d = [[1, 2, 3, 3], [1, 2, 3, 1]]
    >>> alpha_replicates(d, "nominal", indices=np.array([[0, 1, 2, 3], [0, 0, 1, 1]])).round(3).tolist()
    [0.667, 1.0]
    """
    _check_level(level)
    m, dom, counts = _prepare(data, domain, level)
    indices = np.asarray(indices)
    if indices.ndim != 2 or (indices.size and not np.issubdtype(indices.dtype, np.integer)):
        raise AgreementInputError(
            f"indices must be a 2-D (replicates x items) array of whole column numbers; got shape "
            f"{indices.shape}")
    if indices.size and (indices.min() < 0 or indices.max() >= counts.shape[0]):
        raise AgreementInputError(
            f"indices must lie between 0 and {counts.shape[0] - 1} (the item columns of data)")
    indices = indices.astype(int)
    n_boot, n_items, k = indices.shape[0], counts.shape[0], len(dom)
    per_unit = _unit_coincidences(counts)
    flat = (indices + (np.arange(n_boot) * n_items)[:, None]).ravel()
    weights = np.bincount(flat, minlength=n_boot * n_items).reshape(n_boot, n_items).astype(float)
    o_star = (weights @ per_unit).reshape(n_boot, k, k)
    return _alpha_from_o(o_star, dom, level)


def _degenerate_note(n_judges: int, counts: np.ndarray) -> str:
    m_u = counts.sum(axis=1)
    pairable = m_u >= 2
    if n_judges < 2:
        return "alpha is undefined: there is only one judge"
    if not pairable.any():
        return ("alpha is undefined: fewer than two pairable answers (no item was answered by two or "
                "more judges)")
    if (counts[pairable].sum(axis=0) > 0).sum() < 2:
        return "alpha is undefined: every judge gave the same answer"
    return ""


# ------------------------------------------------------------------------------------------ main API

def krippendorff_alpha(data: Any, level: str = "nominal", *, domain: Sequence | None = None,
                       n_boot: int = 0, method: str = "units", ci: float = 0.95,
                       alpha_min: float = 0.667, seed: int | None = None) -> KrippendorffAlpha:
    """Krippendorff's alpha for judges x items data, with an optional bootstrap interval.

    Formula (Krippendorff 2004, 2011): alpha = 1 - D_o / D_e = 1 - (n - 1) * sum_ck o_ck d2_ck /
    sum_ck n_c n_k d2_ck, with the coincidences o_ck of :func:`coincidences` and the metric of
    :func:`distance_matrix` for ``level`` nominal, ordinal, interval or ratio. Items answered by fewer than
    two judges contribute nothing. The point estimate is computed by the ``krippendorff`` package (with
    ``level_of_measurement`` and ``value_domain`` always passed); no variation at all gives NaN and a note.

    Interpretation (Krippendorff 2004) [memory]: rely on alpha >= .800; .667 <= alpha < .800 allows
    tentative conclusions only; below .667 the data are not reliable. ``q_below_min`` is the share of
    bootstrap replicates below ``alpha_min``.

    Bootstrap (``n_boot`` > 0; seeded with numpy ``default_rng(seed)``, reproducible):

    * ``method="units"``: the pairable items (``n_units``) are resampled with replacement and alpha is
      recomputed from each replicate's own coincidence matrix (observed and expected disagreement both
      recomputed); the interval is the percentile interval. Replicates without variation are dropped
      (counted in ``n_boot_undefined``).
    * ``method="pairs"``: Hayes & Krippendorff (2007), "Answering the call for a standard reliability
      measure for coding data", Communication Methods and Measures 1, 77-89. The expected disagreement
      D_e of the observed data is kept fixed; each replicate draws M pairs of values with replacement
      from the cells of the observed coincidence matrix with probabilities o_ck / n, and
      alpha* = 1 - (sum of d2 over the M drawn pairs) / (M * D_e); percentile limits and q are reported.
      M = sum_u m_u (m_u - 1) / 2, the number of pairs of judgments within units (this reproduces the
      239 pairs the paper quotes for its 40-unit example). Implemented from memory of the paper: the
      cap on M and any small-sample adjustments of Krippendorff's later algorithm note are NOT applied;
      alpha* is bounded above by 1 by construction and not otherwise corrected.

    Both are vectorised: replicate weights times per-unit (or per-cell) coincidences, one matrix product.

    Validated against the ``krippendorff`` package (point estimate, all four levels, random designs with
    missing answers) and, for the units bootstrap, against a loop of package calls on the same resampled
    items (identical per replicate).

    Examples
    --------
    Krippendorff (2011), 4 observers x 12 units (nominal .743, ordinal .815, interval .849, ratio .797):

    >>> nan = float("nan")
    >>> data = [[1, 2, 3, 3, 2, 1, 4, 1, 2, nan, nan, nan],
    ...         [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, nan, 3],
    ...         [nan, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, nan],
    ...         [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, nan]]
    >>> [round(krippendorff_alpha(data, lv).alpha, 3) for lv in LEVELS]
    [0.743, 0.815, 0.849, 0.797]
    >>> krippendorff_alpha(data, n_boot=500, seed=1).n_units
    11
    """
    _check_level(level)
    if method not in METHODS:
        raise AgreementInputError(f"method must be 'units' or 'pairs'; got {method!r}")
    if not 0 < ci < 1:
        raise AgreementInputError(f"ci must be between 0 and 1 (e.g. 0.95); got {ci!r}")
    if int(n_boot) != n_boot or n_boot < 0:
        raise AgreementInputError(f"n_boot must be a whole number >= 0; got {n_boot!r}")
    n_boot = int(n_boot)
    m, dom, counts = _prepare(data, domain, level)
    m_u = counts.sum(axis=1)
    pairable = m_u >= 2
    n_units, n_pairable = int(pairable.sum()), int(m_u[pairable].sum())
    nan = float("nan")
    common = dict(level=level, method=method, n_boot=n_boot, n_units=n_units, n_pairable=n_pairable,
                  ci=ci, alpha_min=alpha_min)
    note = _degenerate_note(m.shape[0], counts)
    if note:
        return KrippendorffAlpha(alpha=nan, ci_low=nan, ci_high=nan, q_below_min=nan, note=note, **common)

    point = float(krippendorff.alpha(reliability_data=m.values, value_domain=dom,
                                     level_of_measurement=level))
    if n_boot == 0:
        return KrippendorffAlpha(alpha=point, ci_low=nan, ci_high=nan, q_below_min=nan, **common)

    if method == "units":
        reps = alpha_replicates(m, level, domain=dom, indices=unit_bootstrap_indices(m, n_boot, seed))
    else:
        reps = _pairs_replicates(counts[pairable], dom, level, n_boot, seed)
    finite = reps[np.isfinite(reps)]
    undefined = n_boot - finite.size
    note = ""
    if undefined:
        note = (f"{undefined} of {n_boot} bootstrap replicates had no variation and were left out of the "
                "interval")
    if finite.size == 0:
        return KrippendorffAlpha(alpha=point, ci_low=nan, ci_high=nan, q_below_min=nan, note=note,
                                 n_boot_undefined=undefined, **common)
    tail = (1 - ci) / 2 * 100
    low, high = np.percentile(finite, [tail, 100 - tail])
    return KrippendorffAlpha(alpha=point, ci_low=float(low), ci_high=float(high),
                             q_below_min=float(np.mean(finite < alpha_min)), note=note,
                             n_boot_undefined=undefined, **common)


def _pairs_replicates(counts: np.ndarray, dom: np.ndarray, level: str, n_boot: int,
                      seed: int | None) -> np.ndarray:
    """Hayes & Krippendorff (2007) replicates: M pairs drawn from o_ck / n, D_e fixed."""
    k = len(dom)
    o = _unit_coincidences(counts).sum(axis=0)
    n_c = o.reshape(k, k).sum(axis=1)
    n = n_c.sum()
    d2 = distance_matrix(dom, level, n_c).ravel()
    d_e = float((np.outer(n_c, n_c).ravel() * d2).sum() / (n * (n - 1)))
    m_u = counts.sum(axis=1)
    n_draws = int(round(float((m_u * (m_u - 1) / 2).sum())))
    rng = np.random.default_rng(seed)
    drawn = rng.multinomial(n_draws, o / n, size=n_boot).astype(float)   # (n_boot, K*K) weights
    return 1.0 - (drawn @ d2) / (n_draws * d_e)
