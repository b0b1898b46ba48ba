"""Benchmark of the agreement statistics on a simulated round, with a baseline measured in the same run.

Run: ``.venv/bin/python benchmarks/bench_agreement.py [--judges 200 --items 300 --categories 6
--missing 0.1 --boot 2000 --naive 100 --seed 1]``

Prints the time of the full set of statistics, its peak memory (tracemalloc), the vectorised bootstrap
time (both methods) and a naive loop of krippendorff-package calls on resampled items (``--naive``
replicates timed, extrapolated to ``--boot``). The last line is ``bootstrap speedup: <ratio>x``.
"""

from __future__ import annotations

import argparse
import sys
import time
import tracemalloc
import warnings
from pathlib import Path

import krippendorff
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))      # run from a checkout without installing

from labelstudy.agreement.alpha import LEVELS, krippendorff_alpha, unit_bootstrap_indices
from labelstudy.agreement.gwet import brennan_prediger, gwet_ac1, gwet_ac2, percent_agreement
from labelstudy.agreement.kappa import fleiss_kappa, light_kappa


def simulate(judges: int, items: int, categories: int, missing: float, seed: int):
    """A round of sorting: each item has an intended category; judges pick it with probability .7."""
    rng = np.random.default_rng(seed)
    key = rng.integers(1, categories + 1, items)
    guess = rng.integers(1, categories + 1, (judges, items))
    complete = np.where(rng.random((judges, items)) < 0.7, key[None, :], guess).astype(float)
    data = complete.copy()
    data[rng.random(data.shape) < missing] = np.nan
    return data, complete, key, np.arange(1, categories + 1, dtype=float)


def full_set(data, complete, key, domain) -> list[str]:
    """Every statistic once; returns the names of optional statistics that were skipped."""
    for level in LEVELS:
        krippendorff_alpha(data, level, domain=domain)
    fleiss_kappa(complete, domain=domain)            # Fleiss needs complete data: the same round, complete
    light_kappa(data, domain=domain)
    gwet_ac1(data, domain=domain)
    gwet_ac2(data, domain=domain)
    brennan_prediger(data, domain=domain)
    percent_agreement(data)
    skipped = []
    relevance = np.where(np.isnan(data), np.nan, (data - 1) % 4 + 1)    # a 4-point relevance version
    try:
        from labelstudy.agreement.cvi import item_cvi, modified_kappa, scale_cvi
        item_cvi(relevance), scale_cvi(relevance), modified_kappa(relevance)
    except ImportError:
        skipped.append("content validity (labelstudy.agreement.cvi not available)")
    except Exception as exc:                      # another helper's API may still be changing
        skipped.append(f"content validity ({type(exc).__name__}: {exc})")
    try:
        from labelstudy.agreement.itemsort import hit_ratios, item_sort
        item_sort(data, key), hit_ratios(data, key)
    except ImportError:
        skipped.append("item sort (labelstudy.agreement.itemsort not available)")
    except Exception as exc:
        skipped.append(f"item sort ({type(exc).__name__}: {exc})")
    return skipped


def timed(fn, repeat: int = 3) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--judges", type=int, default=200)
    parser.add_argument("--items", type=int, default=300)
    parser.add_argument("--categories", type=int, default=6)
    parser.add_argument("--missing", type=float, default=0.1)
    parser.add_argument("--boot", type=int, default=2000)
    parser.add_argument("--naive", type=int, default=100, help="naive replicates actually timed")
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()

    data, complete, key, domain = simulate(args.judges, args.items, args.categories, args.missing, args.seed)
    print(f"design: {args.judges} judges x {args.items} items x {args.categories} categories, "
          f"{args.missing:.0%} missing, seed {args.seed}")

    skipped = full_set(data, complete, key, domain)                    # warm-up (imports, caches)
    t_full = timed(lambda: full_set(data, complete, key, domain))
    tracemalloc.start()
    full_set(data, complete, key, domain)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(f"full set of statistics (alpha x4 levels, Fleiss on the complete matrix, Light's kappa, AC1, "
          f"AC2, Brennan-Prediger, percent agreement, plus content-validity and item-sort where "
          f"available): {t_full:.3f} s (best of 3)")
    for s in skipped:
        print(f"  skipped: {s}")
    print(f"peak memory of the full set (tracemalloc): {peak / 2 ** 20:.1f} MiB")

    t_units = timed(lambda: krippendorff_alpha(data, "nominal", domain=domain, n_boot=args.boot,
                                               seed=args.seed))
    t_pairs = timed(lambda: krippendorff_alpha(data, "nominal", domain=domain, n_boot=args.boot,
                                               method="pairs", seed=args.seed))
    print(f"vectorised bootstrap, {args.boot} replicates, nominal: units {t_units:.3f} s, "
          f"pairs {t_pairs:.3f} s (each includes the point estimate)")

    idx = unit_bootstrap_indices(data, args.naive, seed=args.seed)
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        for cols in idx:
            krippendorff.alpha(reliability_data=data[:, cols], value_domain=domain,
                               level_of_measurement="nominal")
    t_naive_measured = time.perf_counter() - start
    t_naive = t_naive_measured / args.naive * args.boot
    print(f"naive loop of krippendorff-package calls on resampled items: {args.naive} replicates took "
          f"{t_naive_measured:.3f} s, extrapolated to {args.boot} replicates: {t_naive:.2f} s")
    print(f"bootstrap speedup: {t_naive / t_units:.1f}x")


if __name__ == "__main__":
    main()
