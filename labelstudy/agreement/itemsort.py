"""Closed item-sort task: judges place each item on one of the offered factors (or "none fits").

Data convention: ``assignments`` is judges x items (rows judges, columns items), one label per cell, missing
(NaN / None / empty string) = no answer. Labels may be numbers or strings (the web app stores factor ids such
as ``"F1"`` and ``"none"``); numbers that are whole (``1.0``) count as the integer ``1``. ``key`` gives each
item's intended factor: a Series or dict indexed by item, or a sequence aligned with the columns. ``domain``
is the full list of labels offered (all factors plus the "none fits" label); by default the observed labels
plus the key's labels, sorted (numbers first, then text). A given domain keeps its order.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
import pandas as pd
from scipy import stats

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement._results import ResultMixin, fmt

__all__ = ["item_sort", "hit_ratios", "HitRatios", "confusion", "label_ambiguity", "critical_count"]


# ----------------------------------------------------------------------------------------------- helpers
# Results share the package's JSON helper (NaN -> None) so every to_dict() looks alike.
_ToDict = ResultMixin


def _norm_label(v: Any) -> Any:
    """One label in canonical form; None for a missing answer."""
    if v is None or v is pd.NA or v is pd.NaT:
        return None
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        if math.isnan(v):
            return None
        if math.isinf(v):
            raise AgreementInputError("an answer is infinite, which is not a category label")
        return int(v) if float(v).is_integer() else float(v)
    if isinstance(v, str):
        s = v.strip()
        return s if s else None
    if isinstance(v, (list, tuple, dict, set, np.ndarray)):
        raise AgreementInputError(f"an answer holds several values ({v!r}); give one label per cell")
    return v


def _sort_labels(labels) -> list:
    return sorted(labels, key=lambda x: (0, x, "") if isinstance(x, (int, float)) and not isinstance(x, bool)
                  else (1, 0, str(x)))


def _table(data: Any, name: str) -> tuple[np.ndarray, tuple, tuple]:
    """Judges x items object array of canonical labels, with judge and item labels."""
    if isinstance(data, pd.DataFrame):
        judges, items = tuple(data.index), tuple(data.columns)
        raw = data.to_numpy(dtype=object)
    else:
        if isinstance(data, (list, tuple)):
            if data and isinstance(data[0], (list, tuple, np.ndarray)):
                lengths = {len(r) for r in data}
                if len(lengths) > 1:
                    raise AgreementInputError(
                        f"{name}: rows have different lengths {sorted(lengths)}; every judge needs one entry "
                        "per item (use NaN or None for no answer)")
                raw = np.empty((len(data), lengths.pop()), dtype=object)
                for i, row in enumerate(data):
                    raw[i, :] = list(row)
            else:
                raw = np.asarray(data, dtype=object)
        else:
            raw = np.asarray(data, dtype=object)
        if raw.ndim != 2:
            raise AgreementInputError(f"{name}: expected a 2-D judges x items table, got {raw.ndim} dimension(s)")
        judges, items = tuple(range(raw.shape[0])), tuple(range(raw.shape[1]))
    if raw.ndim != 2:
        raise AgreementInputError(f"{name}: expected a 2-D judges x items table")
    out = np.empty(raw.shape, dtype=object)
    for idx, v in np.ndenumerate(raw):
        out[idx] = _norm_label(v)
    return out, judges, items


def _resolve_key(key: Any, items: tuple, name: str = "key") -> tuple:
    """The intended label of every item, in column order."""
    if key is None:
        raise AgreementInputError(f"{name}: give the intended factor of every item")
    if isinstance(key, (pd.Series, dict)):
        mapping = dict(key.items())
        missing = [i for i in items if i not in mapping]
        if missing:
            raise AgreementInputError(
                f"{name}: no intended factor for item(s) {', '.join(map(str, missing[:5]))}")
        labels = [_norm_label(mapping[i]) for i in items]
    else:
        seq = list(key)
        if len(seq) != len(items):
            raise AgreementInputError(
                f"{name}: {len(seq)} intended factors given for {len(items)} items (one per column)")
        labels = [_norm_label(v) for v in seq]
    blank = [str(i) for i, lab in zip(items, labels) if lab is None]
    if blank:
        raise AgreementInputError(f"{name}: the intended factor of item(s) {', '.join(blank[:5])} is missing")
    return tuple(labels)


def _resolve_labels(observed, domain: Sequence | None, extra=(), name: str = "assignments") -> tuple:
    if domain is None:
        return tuple(_sort_labels(set(observed) | set(extra)))
    dom = [_norm_label(d) for d in domain]
    if any(d is None for d in dom):
        raise AgreementInputError(f"{name}: the domain contains a missing label")
    if len(set(dom)) != len(dom):
        raise AgreementInputError(f"{name}: the domain lists a label twice")
    unknown = [v for v in _sort_labels(set(observed) - set(dom))]
    if unknown:
        raise AgreementInputError(
            f"{name}: label(s) {', '.join(map(str, unknown[:5]))} are not in the declared domain {dom}")
    unknown_key = [v for v in _sort_labels(set(extra) - set(dom))]
    if unknown_key:
        raise AgreementInputError(
            f"key: intended factor(s) {', '.join(map(str, unknown_key[:5]))} are not in the domain {dom}")
    return tuple(dom)


@dataclass(frozen=True)
class _Coded:
    codes: np.ndarray       # judges x items, int index into domain, -1 = missing
    domain: tuple
    judges: tuple
    items: tuple
    key: np.ndarray | None  # int index into domain per item


def _coded(assignments: Any, key: Any = None, domain: Sequence | None = None, *,
           name: str = "assignments", need_key: bool = True) -> _Coded:
    table, judges, items = _table(assignments, name)
    if need_key and not items:
        raise AgreementInputError(f"{name}: the table has no items (columns); nothing to score")
    keylabs = _resolve_key(key, items) if (need_key or key is not None) else ()
    observed = {v for v in table.ravel() if v is not None}
    dom = _resolve_labels(observed, domain, keylabs, name)
    index = {d: i for i, d in enumerate(dom)}
    codes = np.full(table.shape, -1, dtype=int)
    for idx, v in np.ndenumerate(table):
        if v is not None:
            codes[idx] = index[v]
    keycodes = np.array([index[k] for k in keylabs], dtype=int) if keylabs else None
    return _Coded(codes, dom, judges, items, keycodes)


def _counts(codes: np.ndarray, k: int) -> np.ndarray:
    """Items x categories counts of answers (missing ignored)."""
    n_items = codes.shape[1]
    out = np.zeros((n_items, k), dtype=int)
    j, i = np.nonzero(codes >= 0)
    np.add.at(out, (i, codes[j, i]), 1)
    return out


def critical_count(n: int, *, p0: float = 0.5, alpha: float = 0.05) -> int | None:
    """Smallest count c with P(X >= c | n, p0) < alpha (exact one-sided binomial); None when none exists.

    The critical number of judges placing an item on its intended factor for a significant csv
    (Anderson & Gerbing 1991; p0 = 1/k as in Howard & Melloy 2016).

    >>> critical_count(10), critical_count(20), critical_count(30)
    (9, 15, 20)
    """
    if n < 0 or int(n) != n:
        raise AgreementInputError(f"the number of judges must be a whole number >= 0, got {n}")
    if not 0 < p0 < 1:
        raise AgreementInputError(f"p0 must lie strictly between 0 and 1, got {p0}")
    if not 0 < alpha < 1:
        raise AgreementInputError(f"alpha must lie strictly between 0 and 1, got {alpha}")
    c = np.arange(int(n) + 1)
    ok = np.nonzero(stats.binom.sf(c - 1, int(n), p0) < alpha)[0]
    return int(c[ok[0]]) if ok.size else None


# ----------------------------------------------------------------------------------------------- public
def item_sort(assignments: Any, key: Any, *, domain: Sequence | None = None, p0: float | str = 0.5,
              alpha: float = 0.05, none_code: Any = None) -> pd.DataFrame:
    """Anderson & Gerbing's substantive-validity indices per item, with an exact binomial test.

    For item i with N answers, n_c of them on the intended factor and n_o the largest count on any single
    other label of the domain (the "rival"; with ``none_code`` given, "none fits" is not a rival)::

        psa = n_c / N                    (proportion of substantive agreement, 0..1)
        csv = (n_c - n_o) / N            (substantive-validity coefficient, -1..1)
        p   = P(X >= n_c),  X ~ Binomial(N, p0)      (one-sided exact test)

    ``critical`` is the smallest n_c significant at ``alpha`` for that N. Anderson & Gerbing compare the
    posited factor with its strongest rival, which amounts to p0 = .5 (the default); Howard & Melloy (2016)
    extend the test to several factors with the chance level p0 = 1/k. Pass ``p0="1/k"`` for k = the number
    of labels offered (``len(domain)``, "none fits" included). The p0 used is in ``result.attrs["p0"]``.
    Ties for the rival go to the first label in domain order.

    References: Anderson, J. C. & Gerbing, D. W. (1991). Predicting the performance of measures in a
    confirmatory factor analysis with a pretest assessment of their substantive validities. Journal of
    Applied Psychology, 76, 732-740. Howard, M. C. & Melloy, R. C. (2016). Evaluating item-sort task methods.
    Organizational Research Methods, 19, 173-186.

    Interpretation: psa near 1 means judges place the item where intended; csv near 0 or below means a rival
    factor attracts it as often. Items with no answer get NaN (noted in ``attrs["note"]``).

    Validated against the worked counts in our METHODS notes (N = 20, 14/4/2/0 -> psa .70, csv .50) and
    ``scipy.stats.binomtest(alternative="greater")`` on random designs.

    >>> a = pd.DataFrame({"q1": ["F1"] * 14 + ["F2"] * 4 + ["none"] * 2})
    >>> item_sort(a, {"q1": "F1"}, domain=["F1", "F2", "F3", "none"]).loc["q1", ["psa", "csv", "rival"]].tolist()
    [0.7, 0.5, 'F2']
    """
    c = _coded(assignments, key, domain)
    k = len(c.domain)
    if isinstance(p0, str):
        if p0.replace(" ", "") != "1/k":
            raise AgreementInputError(f'p0 must be a probability or "1/k", got {p0!r}')
        p0 = 1.0 / k
    p0 = float(p0)
    if not 0 < p0 < 1:
        raise AgreementInputError(f"p0 must lie strictly between 0 and 1, got {p0}")
    counts = _counts(c.codes, k)
    n = counts.sum(axis=1)
    rows = np.arange(len(c.items))
    n_c = counts[rows, c.key]
    rivals = counts.copy()
    rivals[rows, c.key] = -1
    if none_code is not None:
        nc = _norm_label(none_code)
        if nc not in c.domain:
            raise AgreementInputError(f"none_code {none_code!r} is not in the domain {list(c.domain)}")
        rivals[:, c.domain.index(nc)] = -1
    best = rivals.argmax(axis=1)
    n_o = np.maximum(rivals[rows, best], 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        psa = np.where(n > 0, n_c / np.maximum(n, 1), np.nan)
        csv = np.where(n > 0, (n_c - n_o) / np.maximum(n, 1), np.nan)
    pval = np.where(n > 0, stats.binom.sf(n_c - 1, n, p0), np.nan)
    crit = [critical_count(int(m), p0=p0, alpha=alpha) if m > 0 else None for m in n]
    out = pd.DataFrame({
        "n": n, "n_c": n_c, "n_o": n_o,
        "rival": [c.domain[b] if o > 0 else None for b, o in zip(best, n_o)],
        "psa": psa, "csv": csv, "p_value": pval,
        "significant": [bool(p < alpha) if m > 0 else False for p, m in zip(pval, n)],
        "critical": pd.array(crit, dtype="Int64"),
    }, index=pd.Index(c.items, name="item"))
    out.insert(0, "intended", [c.domain[x] for x in c.key])
    out.attrs["p0"] = p0
    out.attrs["alpha"] = alpha
    empty = [str(i) for i, m in zip(c.items, n) if m == 0]
    out.attrs["note"] = (f"no answers for item(s) {', '.join(empty[:5])}: indices are undefined"
                         if empty else "")
    return out


@dataclass(frozen=True)
class HitRatios(_ToDict):
    """Placement ("hit") ratios: correct placements / all placements."""

    per_item: pd.Series
    per_factor: pd.Series
    overall: float
    n_placements: int
    note: str = ""

    def __repr__(self) -> str:
        return (f"HitRatios(overall={fmt(self.overall)}, {len(self.per_item)} items, "
                f"{len(self.per_factor)} factors, {self.n_placements} placements)")


def hit_ratios(assignments: Any, key: Any, *, domain: Sequence | None = None) -> HitRatios:
    """Item placement ("hit") ratios of Moore & Benbasat (1991), per item, per intended factor and overall.

    hit ratio = (placements on the intended factor) / (all placements), pooling the answers of the items in
    question. Moore & Benbasat sorted in rounds and treated an overall hit ratio together with pairwise
    Cohen's kappa above about .65 as acceptable [that threshold is quoted from memory].

    Reference: Moore, G. C. & Benbasat, I. (1991). Development of an instrument to measure the perceptions of
    adopting an information technology innovation. Information Systems Research, 2, 192-222.

    Validated by hand-counted examples and the identity hit ratio per item = psa of :func:`item_sort`.

    >>> a = [["A", "B"], ["A", "A"], ["B", "B"], ["A", "B"]]
    >>> r = hit_ratios(a, ["A", "B"])
    >>> r.per_item.tolist(), r.overall
    ([0.75, 0.75], 0.75)
    """
    c = _coded(assignments, key, domain)
    counts = _counts(c.codes, len(c.domain))
    n = counts.sum(axis=1)
    hits = counts[np.arange(len(c.items)), c.key]
    with np.errstate(invalid="ignore", divide="ignore"):
        per_item = pd.Series(np.where(n > 0, hits / np.maximum(n, 1), np.nan),
                             index=pd.Index(c.items, name="item"), name="hit_ratio")
    factors = [d for d in c.domain if d in {c.domain[x] for x in c.key}]
    pf = {}
    for f in factors:
        sel = c.key == c.domain.index(f)
        tot = n[sel].sum()
        pf[f] = hits[sel].sum() / tot if tot else np.nan
    per_factor = pd.Series(pf, name="hit_ratio", dtype=float)
    per_factor.index.name = "factor"
    total = int(n.sum())
    overall = float(hits.sum() / total) if total else float("nan")
    return HitRatios(per_item, per_factor, overall, total, "" if total else "no placements at all")


def confusion(assignments: Any, key: Any, *, domain: Sequence | None = None) -> pd.DataFrame:
    """Counts of placements: intended factor (rows, the factors in the key) x assigned label (columns, the
    whole domain including "none fits"). Row sums are the placements of that factor's items.

    Common practice for reading item-sort data (no single source); the diagonal over the total is the
    overall hit ratio of Moore & Benbasat (1991). Validated by hand counts in the tests.

    >>> confusion([["A", "B"], ["A", "A"]], ["A", "B"], domain=["A", "B", "none"]).to_dict("list")
    {'A': [2, 1], 'B': [0, 1], 'none': [0, 0]}
    """
    c = _coded(assignments, key, domain)
    k = len(c.domain)
    counts = _counts(c.codes, k)
    used = sorted(set(c.key.tolist()))
    mat = np.zeros((len(used), k), dtype=int)
    for r, f in enumerate(used):
        mat[r] = counts[c.key == f].sum(axis=0)
    return pd.DataFrame(mat, index=pd.Index([c.domain[f] for f in used], name="intended"),
                        columns=pd.Index(list(c.domain), name="assigned"))


def label_ambiguity(assignments: Any, key: Any, *, domain: Sequence | None = None) -> pd.DataFrame:
    """How clearly each factor's label is understood, from the confusion table C (intended x assigned).

    These are our compositions of common practice (no single published source). For factor A with row sum
    R_A = all placements of A's items:

    - ``hit_rate`` = C[A, A] / R_A (placements of A's items on A; Moore & Benbasat's hit ratio per factor);
    - ``attraction`` = sum_{B != A} C[B, A] / sum_{B != A} R_B (share of the other factors' item
      placements pulled into A; a label that attracts foreign items is too broad or vague);
    - ``confusion_rate`` = max over other key factors B of (C[A, B] + C[B, A]) / (R_A + R_B), symmetric;
      ``most_confused`` is that B (ties: first in domain order);
    - ``entropy`` = -sum_j p_j ln p_j / ln K, p_j = C[A, j] / R_A over the K labels of the domain
      (normalised Shannon entropy, 0 = all placements in one label, 1 = spread evenly).

    Validated against hand-computed tables in the tests.

    >>> t = label_ambiguity([["A", "B"], ["A", "A"]], ["A", "B"])
    >>> t.loc["A", ["hit_rate", "attraction", "most_confused", "confusion_rate"]].tolist()
    [1.0, 0.5, 'B', 0.25]
    """
    conf = confusion(assignments, key, domain=domain)
    mat = conf.to_numpy(dtype=float)
    factors = list(conf.index)
    cols = list(conf.columns)
    col_of = [cols.index(f) for f in factors]
    rsum = mat.sum(axis=1)
    K = len(cols)
    rows = []
    for a, fa in enumerate(factors):
        hit = mat[a, col_of[a]] / rsum[a] if rsum[a] else np.nan
        others = [b for b in range(len(factors)) if b != a]
        other_tot = rsum[others].sum() if others else 0.0
        attraction = mat[others, col_of[a]].sum() / other_tot if other_tot else np.nan
        best, best_rate = None, np.nan
        for b in others:
            denom = rsum[a] + rsum[b]
            if not denom:
                continue
            rate = (mat[a, col_of[b]] + mat[b, col_of[a]]) / denom
            if best is None or rate > best_rate:
                best, best_rate = factors[b], rate
        if rsum[a] and K > 1:
            p = mat[a] / rsum[a]
            p = p[p > 0]
            ent = float(-(p * np.log(p)).sum() / np.log(K))
        else:
            ent = np.nan
        rows.append({"n": int(rsum[a]), "hit_rate": hit, "attraction": attraction, "most_confused": best,
                     "confusion_rate": best_rate, "entropy": ent})
    return pd.DataFrame(rows, index=pd.Index(factors, name="factor"))
