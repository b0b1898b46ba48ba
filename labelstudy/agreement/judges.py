"""Per-judge diagnostics: who agrees with the key and the panel, who straightlines, who rushes.

Data convention: every table is judges x items (rows judges, columns items), NaN = no answer. DataFrames are
aligned on their judge index; plain arrays must list the same judges in the same order.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
import pandas as pd

from labelstudy.agreement._data import AgreementInputError, as_matrix
from labelstudy.agreement.itemsort import _coded, _norm_label

__all__ = ["judge_diagnostics", "nominal_kappa", "robust_z"]

MAD_SCALE = 1.4826      # MAD -> SD under normality
MEANAD_SCALE = 1.253314  # mean absolute deviation -> SD under normality (fallback when MAD = 0)


def nominal_kappa(x: Any, y: Any, k: int) -> float:
    """Cohen's (1960) kappa of two integer-coded answer vectors over categories 0..k-1 (-1 = missing; pairs
    with a missing side are dropped). kappa = (p_o - p_e) / (1 - p_e); NaN when p_e = 1 or no pairs.
    Validated against ``sklearn.metrics.cohen_kappa_score``.

    >>> nominal_kappa([0, 0, 1, 1], [0, 0, 1, 0], 2)
    0.5
    """
    x, y = np.asarray(x, dtype=int), np.asarray(y, dtype=int)
    if x.shape != y.shape or x.ndim != 1:
        raise AgreementInputError(f"nominal_kappa: two answer vectors of equal length needed, got shapes "
                                  f"{x.shape} and {y.shape}")
    if (x >= k).any() or (y >= k).any():
        raise AgreementInputError(f"nominal_kappa: a code is {max(x.max(), y.max())}, but categories run "
                                  f"0..{k - 1}")
    ok = (x >= 0) & (y >= 0)
    x, y = x[ok], y[ok]
    if x.size == 0:
        return float("nan")
    p_o = float(np.mean(x == y))
    px = np.bincount(x, minlength=k) / x.size
    py = np.bincount(y, minlength=k) / y.size
    p_e = float(px @ py)
    if p_e >= 1 - 1e-12:
        return float("nan")
    return (p_o - p_e) / (1 - p_e)


def robust_z(values: Any, *, floor: float = 0.0) -> np.ndarray:
    """Robust z-scores (x - median) / s with s = 1.4826 * MAD, or 1.253314 * mean absolute deviation when
    the MAD is 0, and at least ``floor``. All 0 when there is no spread; NaN stays NaN.
    Common practice (Iglewicz & Hoaglin 1993, "How to detect and handle outliers").

    >>> robust_z([1.0, 2.0, 3.0, 4.0, 100.0]).round(2).tolist()
    [-1.35, -0.67, 0.0, 0.67, 65.43]
    """
    x = np.asarray(values, dtype=float)
    ok = ~np.isnan(x)
    out = np.full(x.shape, np.nan)
    if not ok.any():
        return out
    med = np.median(x[ok])
    dev = np.abs(x[ok] - med)
    s = MAD_SCALE * np.median(dev)
    if s == 0:
        s = MEANAD_SCALE * dev.mean()
    s = max(s, floor)
    out[ok] = 0.0 if s == 0 else (x[ok] - med) / s
    return out


def _loo_kappa(codes: np.ndarray, k: int) -> np.ndarray:
    """Kappa of each judge against the modal answer of the other judges (ties and empty items left out)."""
    n_j, n_i = codes.shape
    if k == 0 or n_i == 0:                        # no answers at all: no consensus to compare with
        return np.full(n_j, np.nan)
    onehot = np.zeros((n_j, n_i, k))
    jj, ii = np.nonzero(codes >= 0)
    onehot[jj, ii, codes[jj, ii]] = 1
    total = onehot.sum(axis=0)
    out = np.full(n_j, np.nan)
    for j in range(n_j):
        others = total - onehot[j]
        top = others.max(axis=1)
        mode = others.argmax(axis=1)
        unique_top = (others == top[:, None]).sum(axis=1) == 1
        cons = np.where((top > 0) & unique_top, mode, -1)
        out[j] = nominal_kappa(codes[j], cons, k)
    return out


def judge_diagnostics(assignments: Any = None, key: Any = None, *, ratings: Any = None,
                      seconds: Any = None, none_code: Any = None, z: float = 2.5,
                      domain: Sequence | None = None) -> pd.DataFrame:
    """One row per judge with agreement, response-style and timing diagnostics, and an outlier flag.

    Columns (NaN where the input needed was not given):

    - ``agreement_with_key``: the judge's hit ratio, placements on the intended factor / placements
      (Moore & Benbasat 1991); needs ``assignments`` and ``key``;
    - ``kappa_loo``: nominal Cohen's kappa between the judge and the leave-one-out consensus, i.e. the modal
      answer of the other judges per item (items where the others tie or gave no answer are left out);
    - ``none_share``: share of the judge's answers equal to ``none_code``;
    - ``straightlining``: share of the judge's ``ratings`` equal to their most frequent rating, and
      ``rating_sd`` their sample SD (``n_ratings`` ratings);
    - ``median_seconds``: the median of the judge's ``seconds`` per item;
    - ``outlier`` and ``rule`` (the words of every rule that fired, joined by "; ").

    Rules (our rule, following common practice; robust z of :func:`robust_z`, needing 3 or more judges):
    kappa_loo, agreement_with_key or median_seconds more than ``z`` robust SDs below the panel median (the
    robust SD is at least .05 for kappa and agreement, 1 s for time, so that a panel at the ceiling does not
    flag a judge for a trivial difference); none_share > .5; rating_sd == 0 over 5 or more ratings.

    Validated through :func:`nominal_kappa` (checked against scikit-learn) and planted-outlier tests.

    >>> a = pd.DataFrame([["A", "B", "A", "B"]] * 4 + [["B", "A", "B", "A"]], index=list("vwxyz"))
    >>> d = judge_diagnostics(a, ["A", "B", "A", "B"])
    >>> d["outlier"].tolist(), d.loc["z", "agreement_with_key"]
    ([False, False, False, False, True], 0.0)
    """
    if assignments is None and ratings is None and seconds is None:
        raise AgreementInputError("judge diagnostics need assignments, ratings or seconds")
    if key is not None and assignments is None:
        raise AgreementInputError("a key was given without assignments to compare it with")
    cols: dict[str, pd.Series] = {}
    if assignments is not None:
        c = _coded(assignments, key, domain, need_key=False)
        idx = pd.Index(c.judges, name="judge")
        answered = (c.codes >= 0).sum(axis=1)
        cols["n_answers"] = pd.Series(answered, index=idx)
        if c.key is not None:
            hits = (c.codes == c.key[None, :]).sum(axis=1)
            with np.errstate(invalid="ignore", divide="ignore"):
                cols["agreement_with_key"] = pd.Series(np.where(answered > 0, hits / np.maximum(answered, 1),
                                                                np.nan), index=idx)
        cols["kappa_loo"] = pd.Series(_loo_kappa(c.codes, len(c.domain)), index=idx)
        if none_code is not None:
            nc = _norm_label(none_code)
            if nc not in c.domain:
                raise AgreementInputError(f"none_code {none_code!r} is not among the labels {list(c.domain)}")
            nones = (c.codes == c.domain.index(nc)).sum(axis=1)
            with np.errstate(invalid="ignore", divide="ignore"):
                cols["none_share"] = pd.Series(np.where(answered > 0, nones / np.maximum(answered, 1), np.nan),
                                               index=idx)
    if ratings is not None:
        m = as_matrix(ratings, name="ratings")
        idx = pd.Index(m.judges, name="judge")
        share, sd, nr = [], [], []
        for row in m.values:
            v = row[~np.isnan(row)]
            nr.append(v.size)
            if v.size:
                _, cnt = np.unique(v, return_counts=True)
                share.append(cnt.max() / v.size)
            else:
                share.append(np.nan)
            sd.append(float(v.std(ddof=1)) if v.size >= 2 else np.nan)
        cols["n_ratings"] = pd.Series(nr, index=idx)
        cols["straightlining"] = pd.Series(share, index=idx)
        cols["rating_sd"] = pd.Series(sd, index=idx)
    if seconds is not None:
        s = as_matrix(seconds, name="seconds")
        if (s.values < 0).any():
            raise AgreementInputError("seconds: a response time is negative")
        med = [float(np.median(r[~np.isnan(r)])) if (~np.isnan(r)).any() else np.nan for r in s.values]
        cols["median_seconds"] = pd.Series(med, index=pd.Index(s.judges, name="judge"))
    lengths = {len(v) for v in cols.values()}
    plain = [x is not None and not isinstance(x, pd.DataFrame) for x in (assignments, ratings, seconds)]
    if any(plain) and len(lengths) > 1:
        raise AgreementInputError(f"the tables list different numbers of judges ({sorted(lengths)}); pass "
                                  "DataFrames indexed by judge to align them")
    out = pd.concat(cols, axis=1)
    out.index.name = "judge"
    for name in ["n_answers", "agreement_with_key", "kappa_loo", "none_share", "n_ratings", "straightlining",
                 "rating_sd", "median_seconds"]:
        if name not in out.columns:
            out[name] = np.nan
    out = out[["n_answers", "agreement_with_key", "kappa_loo", "none_share", "n_ratings", "straightlining",
               "rating_sd", "median_seconds"]]
    rules: list[list[str]] = [[] for _ in range(len(out))]
    enough = len(out) >= 3
    low = [("kappa_loo", f"kappa with the panel {z:g} robust SDs below the panel median", 0.05),
           ("agreement_with_key", f"agreement with the key {z:g} robust SDs below the panel median", 0.05),
           ("median_seconds", f"median time per item {z:g} robust SDs below the panel median", 1.0)]
    for col, words, floor in low:
        if enough:
            rz = robust_z(out[col].to_numpy(dtype=float), floor=floor)
            for r in np.nonzero(rz < -z)[0]:
                rules[r].append(words)
    for r, (ns, sd, nr) in enumerate(zip(out["none_share"], out["rating_sd"], out["n_ratings"])):
        if ns > 0.5:
            rules[r].append("more than half of the answers are 'none fits'")
        if sd == 0 and nr >= 5:
            rules[r].append(f"the same rating for all {int(nr)} items rated")
    out["outlier"] = [bool(x) for x in rules]
    out["rule"] = ["; ".join(x) for x in rules]
    return out
