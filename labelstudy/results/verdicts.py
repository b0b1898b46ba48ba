"""Verdicts: keep / revise / drop for items and clear / ambiguous / overlapping for labels.

The logic is documented in :mod:`labelstudy.results.rules` (and printed in every report); each verdict
comes with the words of the rule(s) that produced it.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["item_verdict", "label_verdict"]


def _num(x: Any) -> float:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return float("nan")
    return v


def _finite(x: Any) -> bool:
    return math.isfinite(_num(x))


def item_verdict(row: dict, rules) -> tuple[str, str]:
    """(verdict, rule in words) for one item row of the items table."""
    failed: list[str] = []
    hit = _num(row.get("hit_ratio"))
    if _finite(hit) and hit < rules["item_hit_min"]:
        failed.append(f"hit ratio {hit:.2f} < {rules['item_hit_min']:.2f}")
    if row.get("csv_significant") is False:
        failed.append(f"csv {_num(row.get('csv')):.2f} not significant (p = {_num(row.get('csv_p')):.3f} "
                      f">= {rules['csv_alpha']:g})")
    icvi, std = _num(row.get("i_cvi")), _num(row.get("icvi_standard"))
    icvi_low = _finite(icvi) and _finite(std) and icvi < std - 1e-12
    if icvi_low:
        failed.append(f"I-CVI {icvi:.2f} < {std:.2f}")
    if row.get("cvr_meets") is False:
        failed.append(f"CVR {_num(row.get('cvr')):.2f} below its critical value {_num(row.get('cvr_critical')):.2f}")
    fit = row.get("deffit_verdict")
    if fit and fit != "fits intended":
        failed.append(f"definition fit: {fit}")
    flags = [f for f in (row.get("flags") or "").split(", ") if f in rules["revise_solution_flags"]]
    if flags:
        failed.append("solution flag " + ", ".join(flags))
    if _finite(hit) and hit < rules["drop_hit_below"] and icvi_low:
        return "drop", (f"hit ratio {hit:.2f} < {rules['drop_hit_below']:.2f} and I-CVI {icvi:.2f} < "
                        f"{std:.2f}")
    if failed:
        return "revise", "; ".join(failed)
    return "keep", "every measured check passed"


def label_verdict(row: dict, rules, names: dict[str, str]) -> tuple[str, str]:
    """(verdict, rule in words) for one row of the labels table; ``names`` maps factor id -> name."""
    rate = _num(row.get("confusion_rate"))
    other = row.get("most_confused")
    if other and _finite(rate) and rate >= rules["overlap_confusion_min"]:
        return (f"overlapping with {other}",
                f"symmetric confusion rate with {other} ({names.get(other, other)}) {rate:.2f} >= "
                f"{rules['overlap_confusion_min']:.2f}")
    reasons = []
    hit = _num(row.get("hit_rate"))
    if _finite(hit) and hit < rules["label_hit_min"]:
        reasons.append(f"hit rate {hit:.2f} < {rules['label_hit_min']:.2f}")
    ent = _num(row.get("entropy"))
    if _finite(ent) and ent > rules["label_entropy_max"]:
        reasons.append(f"entropy {ent:.2f} > {rules['label_entropy_max']:.2f}")
    clar = _num(row.get("mean_clarity"))
    if _finite(clar) and clar < rules["clarity_min"]:
        reasons.append(f"mean clarity {clar:.2f} < {rules['clarity_min']:.2f}")
    if reasons:
        return "ambiguous", "; ".join(reasons)
    return "clear", "every measured check passed"
