"""Compare two scored rounds of one study (e.g. round 2 after revising items and labels against round 1).

Only numbers already in the two :class:`~labelstudy.results.score.RoundResults` are set side by side; the
change is ``b - a``. Items and labels are matched by id; one present in only one round shows NaN for the
other.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from labelstudy.agreement._results import json_ready

__all__ = ["Comparison", "compare_rounds", "earlier_round"]


@dataclass(frozen=True, eq=False)
class Comparison:
    """``items``, ``labels`` and ``agreement`` tables of round a against round b."""

    round_a: int
    round_b: int
    items: pd.DataFrame
    labels: pd.DataFrame
    agreement: pd.DataFrame

    def to_dict(self) -> dict:
        return {"round_a": self.round_a, "round_b": self.round_b,
                **{n: [json_ready(r) for r in getattr(self, n).to_dict("records")]
                   for n in ("items", "labels", "agreement")}}


def _side(a: pd.DataFrame, b: pd.DataFrame, on: str, cols: list[str], verdict: str = "verdict") -> pd.DataFrame:
    ta = a.set_index(on)
    tb = b.set_index(on)
    ids = list(dict.fromkeys(list(ta.index) + list(tb.index)))
    out = pd.DataFrame(index=pd.Index(ids, name=on))
    for c in cols:
        va = ta[c].reindex(ids).astype(float) if c in ta else pd.Series(np.nan, index=ids)
        vb = tb[c].reindex(ids).astype(float) if c in tb else pd.Series(np.nan, index=ids)
        out[f"{c}_a"], out[f"{c}_b"], out[f"{c}_change"] = va, vb, vb - va
    out["verdict_a"] = ta[verdict].reindex(ids) if verdict in ta else None
    out["verdict_b"] = tb[verdict].reindex(ids) if verdict in tb else None
    out["verdict_changed"] = [bool(x != y) for x, y in zip(out["verdict_a"], out["verdict_b"])]
    return out.reset_index()


def compare_rounds(a, b) -> Comparison:
    """Per item (hit ratio, I-CVI, CVR, verdict), per label (hit rate, confusion, verdict) and per
    coefficient (alpha, AC1 ... by task kind) of round ``a`` against round ``b``."""
    items = _side(a.tables["items"], b.tables["items"], "item", ["hit_ratio", "i_cvi", "cvr"])
    labels = _side(a.tables["labels"], b.tables["labels"], "factor", ["hit_rate", "confusion_rate",
                                                                       "mean_clarity"])
    ag_a = a.tables["agreement"].drop_duplicates(["task_kind", "coefficient"]).set_index(
        ["task_kind", "coefficient"])["value"]
    ag_b = b.tables["agreement"].drop_duplicates(["task_kind", "coefficient"]).set_index(
        ["task_kind", "coefficient"])["value"]
    agreement = pd.concat({"value_a": ag_a, "value_b": ag_b}, axis=1)
    agreement["change"] = agreement["value_b"] - agreement["value_a"]
    return Comparison(a.meta["round_number"], b.meta["round_number"], items, labels,
                      agreement.reset_index())


def earlier_round(store, round_id: int) -> int | None:
    """The id of the latest earlier round of the same study that has answers, or None."""
    rnd = store.get_round(round_id)
    earlier = [r for r in store.list_rounds(rnd["study_id"]) if r["number"] < rnd["number"]]
    for r in sorted(earlier, key=lambda r: -r["number"]):
        if store.answers_state(r["id"])[0] > 0:
            return r["id"]
    return None
