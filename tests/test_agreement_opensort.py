"""Open card sort: co-occurrence, consensus clusters, ARI / AMI, cluster matching, pile names."""

import itertools
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st
from sklearn.metrics import adjusted_mutual_info_score, adjusted_rand_score, silhouette_score

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.opensort import (adjusted_mutual_info, adjusted_rand_index, co_occurrence,
                                           consensus_partition, match_clusters, partition_agreement,
                                           pile_names, silhouette)


def test_ari_check_values():
    # Hubert & Arabie (1985) ARI; values computed with sklearn.metrics.adjusted_rand_score (METHODS notes)
    assert adjusted_rand_index([0, 0, 1, 2], [0, 0, 1, 1]) == pytest.approx(0.5714, abs=5e-5)
    assert adjusted_rand_index([0, 0, 1, 1], [0, 1, 0, 1]) == pytest.approx(-0.5, abs=1e-12)
    assert adjusted_rand_index(["a", "a", "b"], [7, 7, 3]) == 1.0


def test_ari_ami_match_sklearn_on_random_designs():
    # Reference: sklearn adjusted_rand_score; adjusted_mutual_info_score (arithmetic normalisation,
    # Vinh, Epps & Bailey 2010)
    rng = np.random.default_rng(5)
    for _ in range(300):
        n = int(rng.integers(2, 40))
        a = rng.integers(0, rng.integers(1, 8), n)
        b = rng.integers(0, rng.integers(1, 8), n)
        assert adjusted_rand_index(a, b) == pytest.approx(adjusted_rand_score(a, b), abs=1e-9)
        assert adjusted_mutual_info(a, b) == pytest.approx(adjusted_mutual_info_score(a, b), abs=1e-9)


def test_ari_ami_drop_missing_items_and_align_series():
    a = pd.Series(["x", "x", None, "y", "y"], index=list("abcde"))
    b = pd.Series([1, 1, 2, 2, 3], index=list("edcba"))   # reversed order: aligned by item
    kept_a, kept_b = ["x", "x", "y", "y"], [3, 2, 1, 1]
    assert adjusted_rand_index(a, b) == pytest.approx(adjusted_rand_score(kept_a, kept_b))
    assert adjusted_mutual_info(a, b) == pytest.approx(adjusted_mutual_info_score(kept_a, kept_b))
    assert math.isnan(adjusted_rand_index([None], [1])) and math.isnan(adjusted_mutual_info([], []))
    with pytest.raises(AgreementInputError):
        adjusted_rand_index([1, 2], [1, 2, 3])


def test_silhouette_matches_sklearn_precomputed():
    # Rousseeuw (1987); reference sklearn.metrics.silhouette_score(metric="precomputed")
    rng = np.random.default_rng(2)
    done = 0
    for _ in range(250):
        n = int(rng.integers(3, 25))
        lab = rng.integers(0, rng.integers(2, 6), n)
        if not 2 <= len(set(lab)) <= n - 1:
            assert math.isnan(silhouette(np.zeros((n, n)), lab))
            continue
        x = rng.random((n, n))
        d = x + x.T
        np.fill_diagonal(d, 0)
        assert silhouette(d, lab) == pytest.approx(silhouette_score(d, lab, metric="precomputed"), abs=1e-9)
        done += 1
    assert done > 200


def test_co_occurrence_against_a_loop_with_missing():
    rng = np.random.default_rng(3)
    p = rng.integers(0, 3, size=(7, 6)).astype(object)
    p[rng.random(p.shape) < 0.25] = None
    co = co_occurrence(p).to_numpy()
    for i, j in itertools.product(range(6), repeat=2):
        both = [r for r in p if r[i] is not None and r[j] is not None]
        if not both:
            assert math.isnan(co[i, j])
        else:
            assert co[i, j] == pytest.approx(np.mean([r[i] == r[j] for r in both]))


def planted(n_judges=8, noise=0.1, seed=0):
    """Judges sorting 9 items with true groups 0,0,0,1,1,1,2,2,2, each judge naming piles privately."""
    rng = np.random.default_rng(seed)
    truth = np.repeat([0, 1, 2], 3)
    rows = []
    for j in range(n_judges):
        lab = truth.copy()
        flip = rng.random(9) < noise
        lab[flip] = rng.integers(0, 3, flip.sum())
        names = rng.permutation(["red", "green", "blue"])
        rows.append([f"{names[v]}-{j}" for v in lab])
    items = [f"q{i}" for i in range(9)]
    return pd.DataFrame(rows, index=[f"j{j}" for j in range(n_judges)], columns=items), \
        pd.Series([f"F{t + 1}" for t in truth], index=items)


def test_consensus_recovers_planted_groups_and_picks_k_by_silhouette():
    p, key = planted()
    auto = consensus_partition(p)
    assert auto.n_clusters == 3
    assert adjusted_rand_index(auto.labels, key) == 1.0
    assert auto.labels.tolist()[:3] == [1, 1, 1]
    # the automatic choice is the best silhouette over 2 .. n - 1
    dist = 1 - co_occurrence(p).to_numpy()
    np.fill_diagonal(dist, 0)
    best = max(silhouette(dist, consensus_partition(p, k).labels) for k in range(2, 9))
    assert auto.silhouette == pytest.approx(best)
    keyed = consensus_partition(p, key=key)
    assert keyed.n_clusters == 3 and keyed.linkage.shape == (8, 4)
    assert consensus_partition(p, 1).n_clusters == 1 and math.isnan(consensus_partition(p, 1).silhouette)
    assert keyed.to_dict()["n_clusters"] == 3
    assert repr(keyed).startswith("ConsensusPartition(n_clusters=3") and "sizes=[3, 3, 3]" in repr(keyed)


def test_relabelling_piles_changes_nothing():
    p, key = planted(noise=0.4, seed=4)
    relabelled = p.apply(lambda col: col.map(lambda v: v.upper()[::-1]))
    pd.testing.assert_frame_equal(co_occurrence(p), co_occurrence(relabelled))
    pd.testing.assert_frame_equal(partition_agreement(p, key), partition_agreement(relabelled, key))


def test_partition_agreement_rows_and_perfect_sort():
    p, key = planted(noise=0.0)
    t = partition_agreement(p, key)
    assert list(t.index) == list(p.index) + ["consensus"]
    assert (t["ari"] == 1).all() and (t["ami"] == 1).all() and (t["n_piles"] == 3).all()
    p.iloc[0, 0] = None
    t = partition_agreement(p, key)
    assert t.loc["j0", "n_items"] == 8 and t.loc["j0", "ari"] == 1


def test_match_clusters_is_the_best_one_to_one_assignment():
    # Hungarian algorithm (scipy linear_sum_assignment) checked against brute force over permutations
    rng = np.random.default_rng(8)
    for _ in range(40):
        n = 15
        lab = pd.Series(rng.integers(1, 4, n), index=[f"q{i}" for i in range(n)])
        key = pd.Series(rng.choice(["F1", "F2", "F3"], n), index=lab.index)
        m = match_clusters(lab, key)
        total = m["overlap"].sum()
        table = pd.crosstab(lab, key)
        best = max(sum(table.iat[r, c] for r, c in zip(range(len(table)), perm))
                   for perm in itertools.permutations(range(table.shape[1]), min(table.shape)))
        assert total == best
        assert (m["share"] == m["overlap"] / m["size"]).all()


def test_match_clusters_with_more_clusters_than_factors():
    lab = pd.Series([1, 1, 2, 2, 3], index=list("abcde"))
    m = match_clusters(lab, {"a": "F1", "b": "F1", "c": "F2", "d": "F2", "e": "F2"})
    assert m.loc[1, "factor"] == "F1" and m.loc[2, "factor"] == "F2"
    assert m.loc[3, "factor"] is None and m.loc[3, "overlap"] == 0


def test_pile_names_tokens_per_cluster():
    p = pd.DataFrame([["x", "x", "y", "y"], ["a", "a", "a", "b"]], index=["ann", "bo"],
                     columns=["q1", "q2", "q3", "q4"])
    labels = pd.Series([1, 1, 2, 2], index=p.columns)
    names = pd.DataFrame({"judge": ["ann", "ann", "bo", "bo"], "pile": ["x", "y", "a", "b"],
                          "name": ["Pruning & the trees!", "Harvest days", "Pruning, pruning", "harvest"]})
    t = pile_names(p, names, labels)
    c1 = t[t["cluster"] == 1].set_index("token")["count"].to_dict()
    assert c1 == {"pruning": 2, "trees": 1}           # "&", "the", "!" dropped; repeated word counted once
    c2 = t[t["cluster"] == 2].set_index("token")["count"].to_dict()
    assert c2 == {"harvest": 2, "days": 1}
    assert t.iloc[0]["token"] == "pruning"
    with pytest.raises(AgreementInputError, match="cy"):
        pile_names(p, {("cy", "x"): "x"}, labels)
    with pytest.raises(AgreementInputError, match="zz"):
        pile_names(p, {("ann", "zz"): "x"}, labels)


def test_errors_and_degenerate():
    with pytest.raises(AgreementInputError):
        consensus_partition([["a", "b"]])            # 2 items, k chosen automatically
    with pytest.raises(AgreementInputError):
        consensus_partition([["a", "b", "c"]], 5)
    with pytest.raises(AgreementInputError):
        consensus_partition([["a", "b", "c"]], 2, key=["F1", "F2", "F1"])
    r = consensus_partition([["a", "a", None, None], [None, None, "b", "b"]], 2)
    assert "never sorted" in r.note and r.labels.tolist() == [1, 1, 2, 2]


pile = st.sampled_from(["p", "q", "r", None])
sorts = st.integers(1, 5).flatmap(lambda j: st.lists(st.lists(pile, min_size=5, max_size=5), min_size=j,
                                                     max_size=j))


@settings(max_examples=50, deadline=None)
@given(sorts, st.randoms(use_true_random=False))
def test_co_occurrence_invariant_to_judge_order_and_pile_names(rows, rnd):
    df = pd.DataFrame(rows)
    order = list(df.index)
    rnd.shuffle(order)
    mapping = {"p": "zeta", "q": "alpha", "r": "mid"}
    renamed = df.loc[order].apply(lambda col: col.map(lambda v: mapping.get(v)))
    pd.testing.assert_frame_equal(co_occurrence(df), co_occurrence(renamed))
    co = co_occurrence(df).to_numpy()
    ok = co[~np.isnan(co)]
    assert ((ok >= 0) & (ok <= 1)).all() and np.allclose(co, co.T, equal_nan=True)


# ------------------------------------------------------------------------------ audit regressions

def test_match_clusters_without_any_cluster_label_is_empty_with_note():
    # regression: all-missing cluster labels used to escape as a pandas KeyError
    m = match_clusters([np.nan, None], ["F1", "F2"])
    assert m.empty and list(m.columns) == ["factor", "overlap", "size", "share", "factor_share"]
    assert m.attrs["unmatched_factors"] == ["F1", "F2"] and "nothing to match" in m.attrs["note"]
