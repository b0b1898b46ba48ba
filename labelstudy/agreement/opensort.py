"""Open card sort: judges form their own piles of items; compare the piles with the factor solution.

Data convention: ``partitions`` is judges x items (rows judges, columns items); each cell is the label of the
pile the judge put the item in (numbers or strings), NaN / None = the judge did not sort that item. Pile
labels belong to one judge only: judge A's pile "1" and judge B's pile "1" are unrelated. ``key`` maps each
item to its factor (a Series or dict by item, or a sequence aligned with the columns).
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np
import pandas as pd
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.optimize import linear_sum_assignment
from scipy.spatial.distance import squareform
from scipy.special import gammaln

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement._results import fmt
from labelstudy.agreement.itemsort import _coded, _norm_label, _resolve_key, _ToDict

__all__ = ["co_occurrence", "consensus_partition", "ConsensusPartition", "silhouette",
           "adjusted_rand_index", "adjusted_mutual_info", "partition_agreement", "match_clusters",
           "pile_names", "STOPWORDS"]

#: Small English stopword list dropped from pile names by :func:`pile_names`.
STOPWORDS = frozenset(
    "a an the and or of to in on for with about at by from as is are be it its this that these those "
    "my our their your his her we you they i not no but so than very".split())


def co_occurrence(partitions: Any) -> pd.DataFrame:
    """Items x items share of judges who put items i and j in the same pile.

    co(i, j) = (judges with i and j in one pile) / (judges who sorted both i and j); NaN when no judge
    sorted both. The diagonal is 1 for every item sorted by someone. Common practice in card sorting; the
    consensus partition clusters on 1 - co. Validated against a per-judge loop in the tests.

    >>> co_occurrence([["a", "a", "b"], [1, 2, 2]]).to_numpy().tolist()
    [[1.0, 0.5, 0.0], [0.5, 1.0, 0.5], [0.0, 0.5, 1.0]]
    """
    c = _coded(partitions, name="partitions", need_key=False)
    codes = c.codes
    present = codes >= 0
    both = present[:, :, None] & present[:, None, :]
    same = (codes[:, :, None] == codes[:, None, :]) & both
    n_both = both.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(n_both > 0, same.sum(axis=0) / np.maximum(n_both, 1), np.nan)
    idx = pd.Index(c.items, name="item")
    return pd.DataFrame(share, index=idx, columns=idx.rename("item_j"))


def silhouette(distances: Any, labels: Any) -> float:
    """Mean silhouette width (Rousseeuw 1987) from a precomputed distance matrix.

    s(i) = (b_i - a_i) / max(a_i, b_i), a_i = mean distance to the other members of i's cluster, b_i = the
    smallest mean distance to another cluster; s(i) = 0 for a singleton. NaN unless 2 <= clusters <= n - 1.

    Reference: Rousseeuw, P. J. (1987). Silhouettes: a graphical aid to the interpretation and validation of
    cluster analysis. Journal of Computational and Applied Mathematics, 20, 53-65. Validated against
    ``sklearn.metrics.silhouette_score(metric="precomputed")`` on random designs.

    >>> d = np.array([[0, 1, 4, 4], [1, 0, 4, 4], [4, 4, 0, 1], [4, 4, 1, 0.]])
    >>> round(silhouette(d, [1, 1, 2, 2]), 4)
    0.75
    """
    d = np.asarray(distances, dtype=float)
    lab = np.asarray(labels)
    n = len(lab)
    if d.shape != (n, n):
        raise AgreementInputError(f"silhouette: {d.shape} distances for {n} labels")
    groups, inv = np.unique(lab, return_inverse=True)
    if not 2 <= len(groups) <= n - 1:
        return float("nan")
    onehot = np.zeros((n, len(groups)))
    onehot[np.arange(n), inv] = 1.0
    sums = d @ onehot                       # n x clusters: summed distance to each cluster
    size = onehot.sum(axis=0)
    own = size[inv]
    a = sums[np.arange(n), inv] / np.maximum(own - 1, 1)
    mean_other = sums / size
    mean_other[np.arange(n), inv] = np.inf
    b = mean_other.min(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        s = (b - a) / np.maximum(a, b)
    s = np.where(own > 1, np.nan_to_num(s), 0.0)
    return float(s.mean())


@dataclass(frozen=True)
class ConsensusPartition(_ToDict):
    """Consensus clusters of an open sort. ``labels``: item -> cluster number (1, 2, ... in item order);
    ``linkage``: the scipy linkage matrix (for a dendrogram); ``silhouette`` of the cut."""

    labels: pd.Series
    linkage: np.ndarray
    n_clusters: int
    silhouette: float
    note: str = ""

    def __repr__(self) -> str:
        sizes = self.labels.value_counts().sort_index().tolist()
        return (f"ConsensusPartition(n_clusters={self.n_clusters}, silhouette={fmt(self.silhouette)}, "
                f"sizes={sizes})")


def consensus_partition(partitions: Any, n_clusters: int | None = None, *, key: Any = None
                        ) -> ConsensusPartition:
    """Consensus piles by average-linkage (UPGMA) clustering on the distance 1 - co-occurrence.

    The number of clusters is ``n_clusters`` if given, else the number of factors in ``key``, else the cut
    with the best mean silhouette over 2 .. n_items - 1 (ties: fewer clusters). Pairs of items never sorted
    by the same judge count as distance 1. Clusters are numbered 1, 2, ... in order of their first item.

    Average linkage on co-occurrence is common practice in card-sort analysis (no single source); clustering
    by :func:`scipy.cluster.hierarchy.linkage`, silhouette by :func:`silhouette` (Rousseeuw 1987).
    Validated by recovering planted partitions in the tests.

    >>> p = [["x", "x", "y", "y"], ["a", "a", "b", "b"], [1, 1, 1, 2]]
    >>> consensus_partition(p).labels.tolist()
    [1, 1, 2, 2]
    """
    co = co_occurrence(partitions)
    n = co.shape[0]
    notes = []
    dist = 1.0 - co.to_numpy()
    if np.isnan(dist).any():
        notes.append("some item pairs were never sorted by the same judge; they count as never grouped")
        dist = np.nan_to_num(dist, nan=1.0)
    np.fill_diagonal(dist, 0.0)
    if key is not None:
        if n_clusters is not None:
            raise AgreementInputError("give either n_clusters or key, not both")
        n_clusters = len(set(_resolve_key(key, tuple(co.index))))
    if n < 2:
        raise AgreementInputError(f"partitions: an open sort needs at least 2 items, got {n}")
    Z = linkage(squareform(dist, checks=False), method="average")

    def cut(k: int) -> np.ndarray:
        raw = fcluster(Z, k, criterion="maxclust")
        order = {c: i + 1 for i, c in enumerate(pd.unique(raw))}
        return np.array([order[c] for c in raw])

    if n_clusters is None:
        if n < 3:
            raise AgreementInputError(
                "partitions: choosing the number of clusters needs at least 3 items; pass n_clusters")
        best = None
        for k in range(2, n):
            lab = cut(k)
            s = silhouette(dist, lab)
            if not np.isnan(s) and (best is None or s > best[0] + 1e-12):
                best = (s, lab)
        if best is None:
            lab, s = cut(2), float("nan")
            notes.append("no cut has a defined silhouette")
        else:
            s, lab = best
    else:
        if int(n_clusters) != n_clusters or not 1 <= n_clusters <= n:
            raise AgreementInputError(f"n_clusters must be a whole number from 1 to {n}, got {n_clusters}")
        lab = cut(int(n_clusters))
        s = silhouette(dist, lab)
    k_found = int(len(set(lab.tolist())))
    if n_clusters is not None and k_found != n_clusters:
        notes.append(f"tied merge heights: the tree gives {k_found} clusters where {n_clusters} were asked")
    labels = pd.Series(lab, index=co.index.copy(), name="cluster")
    return ConsensusPartition(labels, Z, k_found, float(s), "; ".join(notes))


# ------------------------------------------------------------------------------- partition comparison
def _pair(a: Any, b: Any) -> tuple[np.ndarray, np.ndarray]:
    """Two labelings as integer codes over the items both label (missing dropped; Series aligned by index)."""
    if isinstance(a, pd.Series) and isinstance(b, pd.Series):
        if set(a.index) != set(b.index):
            raise AgreementInputError("the two partitions label different items")
        b = b.reindex(a.index)
    la, lb = [_norm_label(v) for v in list(a)], [_norm_label(v) for v in list(b)]
    if len(la) != len(lb):
        raise AgreementInputError(f"the two partitions have {len(la)} and {len(lb)} items")
    keep = [(x, y) for x, y in zip(la, lb) if x is not None and y is not None]
    ca = pd.factorize(pd.Series([x for x, _ in keep], dtype=object))[0]
    cb = pd.factorize(pd.Series([y for _, y in keep], dtype=object))[0]
    return ca, cb


def _contingency(ca: np.ndarray, cb: np.ndarray) -> np.ndarray:
    table = np.zeros((ca.max(initial=-1) + 1, cb.max(initial=-1) + 1))
    np.add.at(table, (ca, cb), 1)
    return table


def adjusted_rand_index(a: Any, b: Any) -> float:
    """Adjusted Rand index of two partitions of the same items (Hubert & Arabie 1985).

    From the contingency table n_ij with row sums a_i, column sums b_j and n items::

        index = sum C(n_ij, 2);  expected = sum C(a_i, 2) * sum C(b_j, 2) / C(n, 2)
        ARI   = (index - expected) / (0.5 * (sum C(a_i, 2) + sum C(b_j, 2)) - expected)

    1 = identical partitions, about 0 = chance, negative = worse than chance. Items missing in either are
    left out; when both partitions are trivial in the same way (one pile each, or all singletons) the ARI is
    1. Label values are arbitrary. NaN with no items.

    Reference: Hubert, L. & Arabie, P. (1985). Comparing partitions. Journal of Classification, 2, 193-218.
    Validated against ``sklearn.metrics.adjusted_rand_score`` on random designs.

    >>> round(adjusted_rand_index([0, 0, 1, 2], [0, 0, 1, 1]), 4), adjusted_rand_index([0, 0, 1, 1], [0, 1, 0, 1])
    (0.5714, -0.5)
    """
    ca, cb = _pair(a, b)
    n = len(ca)
    if n == 0:
        return float("nan")
    t = _contingency(ca, cb).astype(np.int64)
    c2 = lambda x: int((x * (x - 1) // 2).sum())  # noqa: E731  (exact integer pair counts)
    index, sa, sb, total = c2(t), c2(t.sum(axis=1)), c2(t.sum(axis=0)), n * (n - 1) // 2
    # (index - sa*sb/total) / (0.5*(sa+sb) - sa*sb/total), multiplied through by 2*total: one division
    num, denom = 2 * (index * total - sa * sb), (sa + sb) * total - 2 * sa * sb
    if denom == 0:
        return 1.0
    return float(num / denom)


def _entropy(counts: np.ndarray) -> float:
    p = counts[counts > 0] / counts.sum()
    return float(-(p * np.log(p)).sum())


def _expected_mi(t: np.ndarray) -> float:
    """E[MI] under the hypergeometric model of random partitions with the table's margins (Vinh et al.)."""
    n = t.sum()
    a, b = t.sum(axis=1), t.sum(axis=0)
    top = int(min(a.max(), b.max()))
    nij = np.arange(1, top + 1, dtype=float)[None, None, :]
    A, B = a[:, None, None], b[None, :, None]
    valid = (nij >= np.maximum(1, A + B - n)) & (nij <= np.minimum(A, B))
    with np.errstate(invalid="ignore", divide="ignore"):
        log_p = (gammaln(A + 1) + gammaln(B + 1) + gammaln(n - A + 1) + gammaln(n - B + 1) - gammaln(n + 1)
                 - gammaln(nij + 1) - gammaln(A - nij + 1) - gammaln(B - nij + 1)
                 - gammaln(n - A - B + nij + 1))
        term = nij / n * (np.log(n * nij) - np.log(A * B)) * np.exp(log_p)
    return float(np.where(valid, term, 0.0).sum())


def adjusted_mutual_info(a: Any, b: Any) -> float:
    """Adjusted mutual information of two partitions (Vinh, Epps & Bailey 2010), arithmetic normalisation.

    AMI = (MI - E[MI]) / (mean(H(a), H(b)) - E[MI]), natural logs, E[MI] under the permutation
    (hypergeometric) model; mean = arithmetic mean, as scikit-learn's default. 1 = identical, about 0 =
    chance. Items missing in either are left out; identical partitions give 1 (including the degenerate
    one-pile and all-singleton cases). NaN with no items.

    Reference: Vinh, N. X., Epps, J. & Bailey, J. (2010). Information theoretic measures for clusterings
    comparison. Journal of Machine Learning Research, 11, 2837-2854. Validated against
    ``sklearn.metrics.adjusted_mutual_info_score`` on random designs.

    >>> adjusted_mutual_info([0, 0, 1, 1], [5, 5, 7, 7])
    1.0
    """
    ca, cb = _pair(a, b)
    if len(ca) == 0:
        return float("nan")
    t = _contingency(ca, cb)
    if (t > 0).sum() == t.shape[0] == t.shape[1]:      # identical up to relabelling
        return 1.0
    n = t.sum()
    a_, b_ = t.sum(axis=1), t.sum(axis=0)
    nz = t > 0
    mi = float((t[nz] / n * (np.log(n * t[nz]) - np.log(np.outer(a_, b_)[nz]))).sum())
    emi = _expected_mi(t)
    denom = 0.5 * (_entropy(a_) + _entropy(b_)) - emi
    eps = np.finfo(float).eps
    denom = min(denom, -eps) if denom < 0 else max(denom, eps)
    return float((mi - emi) / denom)


def partition_agreement(partitions: Any, key: Any) -> pd.DataFrame:
    """Each judge's piles, and the consensus partition, against the factor key.

    One row per judge plus a ``"consensus"`` row (:func:`consensus_partition` with as many clusters as
    factors): ``ari`` (:func:`adjusted_rand_index`), ``ami`` (:func:`adjusted_mutual_info`), ``n_piles``
    and ``n_items`` (items the judge sorted; a judge is compared on those only). Validated through the two
    indices' checks against scikit-learn.

    >>> p = pd.DataFrame([["x", "x", "y", "y"], ["a", "b", "b", "b"]], index=["ann", "bo"])
    >>> partition_agreement(p, ["F1", "F1", "F2", "F2"])["ari"].round(3).tolist()
    [1.0, 0.0, 1.0]
    """
    c = _coded(partitions, name="partitions", need_key=False)
    keylabs = _resolve_key(key, c.items)
    rows = []
    for j, judge in enumerate(c.judges):
        pj = [c.domain[v] if v >= 0 else None for v in c.codes[j]]
        sorted_ = [v is not None for v in pj]
        rows.append({"judge": judge, "ari": adjusted_rand_index(pj, keylabs),
                     "ami": adjusted_mutual_info(pj, keylabs),
                     "n_piles": len({v for v in pj if v is not None}), "n_items": int(sum(sorted_))})
    cons = consensus_partition(partitions, key=pd.Series(keylabs, index=c.items)).labels
    rows.append({"judge": "consensus", "ari": adjusted_rand_index(list(cons), keylabs),
                 "ami": adjusted_mutual_info(list(cons), keylabs), "n_piles": int(cons.nunique()),
                 "n_items": len(cons)})
    return pd.DataFrame(rows).set_index("judge")


def match_clusters(labels: Any, key: Any) -> pd.DataFrame:
    """Match clusters to factors one-to-one, maximising the items they share (Hungarian algorithm,
    :func:`scipy.optimize.linear_sum_assignment` on the cluster x factor overlap table; Kuhn 1955).

    One row per cluster: ``factor`` (None when there are more clusters than factors and this one is left
    over), ``overlap`` (items in both), ``size`` (items in the cluster), ``share`` = overlap / size and
    ``factor_share`` = overlap / items of that factor. ``labels`` is a Series item -> cluster (or a sequence
    aligned with ``key``). Validated on planted partitions in the tests.

    >>> m = match_clusters(pd.Series([1, 1, 2, 2], index=list("abcd")), {"a": "F2", "b": "F2", "c": "F1", "d": "F2"})
    >>> m["factor"].tolist(), m["overlap"].tolist()
    (['F2', 'F1'], [2, 1])
    """
    if isinstance(labels, pd.Series):
        items = tuple(labels.index)
        lab = [_norm_label(v) for v in labels]
    else:
        lab = [_norm_label(v) for v in labels]
        items = tuple(key.index) if isinstance(key, pd.Series) else tuple(range(len(lab)))
    keylabs = _resolve_key(key, items)
    keep = [i for i, v in enumerate(lab) if v is not None]
    if not keep:
        res = pd.DataFrame(columns=["factor", "overlap", "size", "share", "factor_share"],
                           index=pd.Index([], name="cluster"))
        res.attrs["unmatched_factors"] = list(dict.fromkeys(keylabs))
        res.attrs["note"] = "no item has a cluster label: nothing to match"
        return res
    table = pd.crosstab(pd.Series([lab[i] for i in keep], name="cluster"),
                        pd.Series([keylabs[i] for i in keep], name="factor"))
    rows, cols = linear_sum_assignment(-table.to_numpy())
    chosen = dict(zip(rows, cols))
    out = []
    fsize = table.sum(axis=0).to_numpy()
    for r, cl in enumerate(table.index):
        size = int(table.iloc[r].sum())
        if r in chosen:
            f = chosen[r]
            ov = int(table.iat[r, f])
            out.append({"cluster": cl, "factor": table.columns[f], "overlap": ov, "size": size,
                        "share": ov / size, "factor_share": ov / fsize[f]})
        else:
            out.append({"cluster": cl, "factor": None, "overlap": 0, "size": size, "share": 0.0,
                        "factor_share": np.nan})
    res = pd.DataFrame(out).set_index("cluster")
    res.attrs["unmatched_factors"] = [f for i, f in enumerate(table.columns) if i not in set(cols)]
    return res


def _tokens(text: str) -> list[str]:
    return [t for t in re.findall(r"[^\W_]+", str(text).lower()) if t not in STOPWORDS]


def pile_names(partitions: Any, names: Mapping | pd.DataFrame, labels: pd.Series) -> pd.DataFrame:
    """The words judges used to name their piles, gathered per consensus cluster.

    Each named pile is attributed to the consensus cluster holding most of its items (ties: the lower
    cluster number). Names are lowercased, split on anything that is not a letter or digit, and stopwords
    (:data:`STOPWORDS`) dropped. ``count`` = number of pile names in the cluster using the token (a token
    repeated within one name counts once); ``n_names`` = named piles attributed to the cluster. Sorted by
    cluster, then count (descending), then token. Our definition (common practice of reading open sorts).

    ``names`` maps (judge, pile label) -> name text, or is a DataFrame with columns judge, pile, name.

    >>> p = pd.DataFrame([["x", "x", "y"], ["a", "a", "b"]], index=["ann", "bo"], columns=["q1", "q2", "q3"])
    >>> nm = {("ann", "x"): "Tree care", ("bo", "a"): "Care of the trees", ("bo", "b"): "Harvest"}
    >>> pile_names(p, nm, pd.Series([1, 1, 2], index=["q1", "q2", "q3"])).head(1).to_dict("records")
    [{'cluster': 1, 'token': 'care', 'count': 2, 'n_names': 2}]
    """
    c = _coded(partitions, name="partitions", need_key=False)
    if isinstance(names, pd.DataFrame):
        for col in ("judge", "pile", "name"):
            if col not in names.columns:
                raise AgreementInputError(f"pile names: no column {col!r} (columns: {list(names.columns)})")
        names = {(r.judge, r.pile): r.name for r in names.itertuples(index=False)}
    lab = labels.reindex(list(c.items))
    counts: dict[Any, Counter] = {}
    n_names: Counter = Counter()
    jindex = {j: i for i, j in enumerate(c.judges)}
    for (judge, pile), text in names.items():
        if judge not in jindex:
            raise AgreementInputError(f"pile names: judge {judge!r} is not in the partitions")
        pl = _norm_label(pile)
        if pl not in c.domain:
            raise AgreementInputError(f"pile names: judge {judge!r} has no pile {pile!r}")
        members = c.codes[jindex[judge]] == c.domain.index(pl)
        cl = lab[members].dropna()
        if cl.empty or text is None or (isinstance(text, float) and np.isnan(text)):
            continue
        vc = cl.value_counts()
        cluster = min(vc.index[vc == vc.max()])
        n_names[cluster] += 1
        counts.setdefault(cluster, Counter()).update(set(_tokens(text)))
    rows = [{"cluster": cl, "token": tok, "count": cnt, "n_names": n_names[cl]}
            for cl, ctr in counts.items() for tok, cnt in ctr.items()]
    out = pd.DataFrame(rows, columns=["cluster", "token", "count", "n_names"])
    if out.empty:
        return out
    out = out.sort_values(["cluster", "count", "token"], ascending=[True, False, True], kind="mergesort")
    return out.reset_index(drop=True)
