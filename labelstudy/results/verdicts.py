"""Verdicts: keep / revise / drop for items and clear / ambiguous / overlapping for labels.

The logic is documented in :mod:`labelstudy.results.rules` (and printed in every report); each verdict
comes with the words of the rule(s) that produced it.
"""

from __future__ import annotations

import math
from typing import Any

from labelstudy.agreement import meets_icvi_standard

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
    """(verdict, rule in words) for one item row of the items table (logic: :mod:`labelstudy.results.rules`)."""
    failed: list[str] = []      # required checks that failed
    noted: list[str] = []       # measured checks that failed but are not required
    placement, relevance = rules["placement_criterion"], rules["relevance_criterion"]

    def check(failing: bool, words: str, required: bool) -> None:
        if failing:
            (failed if required else noted).append(words)

    hit = _num(row.get("hit_ratio"))
    check(_finite(hit) and hit < rules["item_hit_min"], f"hit ratio {hit:.2f} < {rules['item_hit_min']:.2f}",
          placement in ("hit_ratio", "both"))
    check(row.get("csv_significant") is False,
          f"csv {_num(row.get('csv')):.2f} not significant (p = {_num(row.get('csv_p')):.3f} >= "
          f"{rules['csv_alpha']:g})", placement in ("csv", "both"))
    icvi, std = _num(row.get("i_cvi")), _num(row.get("icvi_standard"))
    icvi_low = _finite(icvi) and _finite(std) and not meets_icvi_standard(icvi, std)
    check(icvi_low, f"I-CVI {icvi:.2f} < {std:.2f}", relevance in ("icvi", "both"))
    check(row.get("cvr_meets") is False,
          f"CVR {_num(row.get('cvr')):.2f} below its critical value {_num(row.get('cvr_critical')):.2f}",
          relevance in ("cvr", "both"))
    fit = row.get("deffit_verdict")
    if fit and fit != "fits intended":
        check(True, f"definition fit: {fit}", fit != "unclear" or rules["deffit_unclear_revises"])
    flags = [f for f in (row.get("flags") or "").split(", ") if f in rules["revise_solution_flags"]]
    if flags:
        failed.append("solution flag " + ", ".join(flags))
    note = f"; noted: {'; '.join(noted)}" if noted else ""
    if _finite(hit) and hit < rules["drop_hit_below"] and icvi_low:
        return "drop", (f"hit ratio {hit:.2f} < {rules['drop_hit_below']:.2f} and I-CVI {icvi:.2f} < "
                        f"{std:.2f}" + note)
    if failed:
        return "revise", "; ".join(failed) + note
    return "keep", "every required check passed" + note


def label_verdict(row: dict, rules, names: dict[str, str]) -> tuple[str, str]:
    """(verdict, rule in words) for one row of the labels table; ``names`` maps factor id -> name.

    An overlapping label is named as such (the stronger finding); when it is also ambiguous on its own
    the rule text says so too, so no failed check is hidden.
    """
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
    rate = _num(row.get("confusion_rate"))
    other = row.get("most_confused")
    if other and _finite(rate) and rate >= rules["overlap_confusion_min"]:
        words = (f"symmetric confusion rate with {other} ({names.get(other, other)}) {rate:.2f} >= "
                 f"{rules['overlap_confusion_min']:.2f}")
        if reasons:
            words += "; ambiguous as well: " + "; ".join(reasons)
        return f"overlapping with {other}", words
    if reasons:
        return "ambiguous", "; ".join(reasons)
    return "clear", "every measured check passed"
