"""Rule-of-thumb diagnosis of a factor solution before labelling.

The thresholds are common practice in exploratory factor analysis (no single source): a salient loading
is ``|loading| >= .40``; an item cross-loads when its second loading is ``>= .30`` or lies within ``.20``
of its first; a factor wants three or more salient items (two are defensible only inside a model with
several correlated factors); a factor correlation ``|phi| >= .80`` questions whether two factors are
distinct. Every threshold is a parameter (:class:`Thresholds`).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np
import pandas as pd

from labelstudy.errors import LabelstudyError
from labelstudy.solution.model import Solution

__all__ = ["Thresholds", "Diagnosis", "diagnose", "ITEM_FLAGS", "FACTOR_FLAGS", "OBLIQUE_ROTATIONS"]

_EPS = 1e-9  # printed loadings: 0.60 - 0.40 must count as a gap of exactly .20

ITEM_FLAGS = {
    "no_salient": "no salient loading: the largest |loading| is below the salient threshold",
    "cross_loading": "cross-loading: the second loading is large, or close to the first",
    "negative": "loads negatively on its factor but is not declared reverse keyed",
    "reverse_keyed": "declared reverse keyed and loads negatively on its factor (as expected)",
}
FACTOR_FLAGS = {
    "few_items": "fewer salient items than the minimum; common practice: three or more items per factor; "
                 "two are defensible only inside a model with several correlated factors",
    "high_correlation": "correlates highly with another factor: the two may not be distinct",
}
OBLIQUE_ROTATIONS = ("oblimin", "promax", "geomin", "quartimin", "oblique", "bentlerq", "simplimax",
                     "cluster", "biquartimin", "oblimax", "entropy", "bifactor", "target")


@dataclass(frozen=True)
class Thresholds:
    """Diagnosis thresholds; the defaults are common practice in EFA (no single source).

    Attributes
    ----------
    salient : float, default 0.40
        Smallest ``|loading|`` that counts as salient (an item with no salient loading is ``no_salient``).
    cross_secondary : float, default 0.30
        A second ``|loading|`` at or above this makes the item ``cross_loading``.
    cross_gap : float, default 0.20
        A salient item whose first and second ``|loading|`` differ by less than this is ``cross_loading``.
    min_items : int, default 3
        A factor with fewer salient primary items is ``few_items`` (two are defensible only inside a model
        with several correlated factors).
    phi_high : float, default 0.80
        ``|phi|`` at or above this flags both factors ``high_correlation:<other id>``.
    orthogonal_tol : float, default 1e-6
        A phi matrix within this of the identity is read as an orthogonal solution.
    """

    salient: float = 0.40
    cross_secondary: float = 0.30
    cross_gap: float = 0.20
    min_items: int = 3
    phi_high: float = 0.80
    orthogonal_tol: float = 1e-6

    def __post_init__(self):
        for name in ("salient", "cross_secondary", "cross_gap", "phi_high"):
            v = getattr(self, name)
            if not 0 <= v <= 1:
                raise LabelstudyError(f"threshold {name} must lie between 0 and 1, not {v}")
        if self.min_items < 1:
            raise LabelstudyError(f"threshold min_items must be at least 1, not {self.min_items}")
        if self.orthogonal_tol < 0:
            raise LabelstudyError("threshold orthogonal_tol must not be negative")


@dataclass(frozen=True)
class Diagnosis:
    """Item and factor flags for a solution.

    Attributes
    ----------
    items : DataFrame
        One row per item: ``item, text, primary, primary_loading, secondary, secondary_loading, flags``
        (list of codes from :data:`ITEM_FLAGS`) and ``reverse_keyed``.
    factors : DataFrame
        One row per factor: ``factor, name, salient_items, flags`` (``few_items``,
        ``high_correlation:<other id>``).
    notes : tuple of str
        Solution-level findings in words.
    thresholds : Thresholds
    """

    items: pd.DataFrame
    factors: pd.DataFrame
    notes: tuple[str, ...]
    thresholds: Thresholds = field(default_factory=Thresholds)

    def to_dict(self) -> dict:
        """JSON-ready form (plain floats, lists)."""
        def num(x):
            return None if x is None or (isinstance(x, float) and np.isnan(x)) else float(x)

        return {
            "items": [{"id": r.item, "primary": r.primary, "primary_loading": num(r.primary_loading),
                       "secondary": r.secondary, "secondary_loading": num(r.secondary_loading),
                       "flags": list(r.flags)} for r in self.items.itertuples(index=False)],
            "factors": [{"id": r.factor, "name": r.name, "salient_items": int(r.salient_items),
                         "flags": list(r.flags)} for r in self.factors.itertuples(index=False)],
            "notes": list(self.notes),
            "thresholds": asdict(self.thresholds),
        }


def _item_row(item, t: Thresholds) -> dict:
    ranked = sorted(range(len(item.loadings)), key=lambda k: -abs(item.loadings[k][1]))  # stable: ties
    p_id, p = item.loadings[ranked[0]]                                                   # keep file order
    s_id, s = item.loadings[ranked[1]] if len(ranked) > 1 else (None, float("nan"))
    flags = []
    salient = abs(p) >= t.salient - _EPS
    if not salient:
        flags.append("no_salient")
    if s_id is not None and (abs(s) >= t.cross_secondary - _EPS
                             or (salient and abs(p) - abs(s) < t.cross_gap - _EPS)):
        flags.append("cross_loading")
    if p < 0:
        flags.append("reverse_keyed" if item.reverse_keyed else "negative")
    return {"item": item.id, "text": item.text, "primary": p_id, "primary_loading": p,
            "secondary": s_id, "secondary_loading": s, "flags": flags, "reverse_keyed": item.reverse_keyed,
            "_salient": salient}


def _is_oblique(rotation: str | None) -> bool:
    r = (rotation or "").lower().replace("-", "").replace(" ", "").replace("_", "")
    return any(name in r for name in OBLIQUE_ROTATIONS)


def diagnose(solution: Solution, thresholds: Thresholds = Thresholds()) -> Diagnosis:
    """Flag items and factors of ``solution`` by the rules of thumb in :class:`Thresholds`.

    Primary factor = largest ``|loading|`` (ties: the earlier factor), secondary = second largest;
    both loadings are reported signed. Item flags: ``no_salient`` (``|primary| < salient``),
    ``cross_loading`` (``|secondary| >= cross_secondary``, or, for an item with a salient primary,
    ``|primary| - |secondary| < cross_gap``), ``negative`` (primary loading below zero, not declared
    reverse keyed) or ``reverse_keyed`` (declared, information only). Factor flags: ``few_items`` (fewer
    than ``min_items`` salient primary items), ``high_correlation:<id>`` (``|phi| >= phi_high``).
    Comparisons allow 1e-9 for rounding, so a printed gap of 0.60 - 0.40 counts as .20.

    Examples
    --------
    >>> from labelstudy.solution.model import Factor, Item, Solution
    >>> items = tuple(Item(f"q{k}", "t", (("A", a), ("B", b)), None)
    ...               for k, (a, b) in enumerate([(.7, .1), (.6, .4), (.2, .1), (.1, .8)]))
    >>> sol = Solution(items, (Factor("A", "a", ""), Factor("B", "b", "")), None, (), "x")
    >>> d = diagnose(sol)
    >>> [f for f in d.items["flags"]]
    [[], ['cross_loading'], ['no_salient'], []]
    >>> list(d.factors["salient_items"])
    [2, 1]
    """
    t = thresholds
    rows = [_item_row(it, t) for it in solution.items]
    ids = [f.id for f in solution.factors]
    counts = {f: 0 for f in ids}
    for r in rows:
        if r["_salient"] and r["primary"] in counts:
            counts[r["primary"]] += 1
    notes: list[str] = []
    fflags: dict[str, list[str]] = {f: [] for f in ids}
    names = {f.id: f.name for f in solution.factors}
    for f in ids:
        if counts[f] < t.min_items:
            fflags[f].append("few_items")
            notes.append(f"factor {f} ({names[f]}): {counts[f]} salient item{'s' if counts[f] != 1 else ''} "
                         f"(|loading| >= {t.salient:.2f}); common practice: {t.min_items} or more items per "
                         f"factor; two are defensible only inside a model with several correlated factors")
    phi = solution.phi
    if phi is None:
        rotation = solution.meta_value("rotation")
        if _is_oblique(rotation):
            notes.append(f"the rotation {rotation!r} is oblique but no factor correlation matrix (phi) was "
                         f"supplied: factor correlations are unknown; add the phi table to check whether "
                         f"factors are distinct")
        else:
            notes.append("no factor correlation matrix: orthogonal rotation: factor correlations fixed at "
                         "zero")
    else:
        m = np.asarray(phi, dtype=float)
        if np.all(np.abs(m - np.eye(len(ids))) <= t.orthogonal_tol):
            notes.append("orthogonal rotation: factor correlations fixed at zero")
        for a in range(len(ids)):
            for b in range(a + 1, len(ids)):
                if abs(m[a, b]) >= t.phi_high - _EPS:
                    fflags[ids[a]].append(f"high_correlation:{ids[b]}")
                    fflags[ids[b]].append(f"high_correlation:{ids[a]}")
                    notes.append(f"factors {ids[a]} ({names[ids[a]]}) and {ids[b]} ({names[ids[b]]}) "
                                 f"correlate {m[a, b]:.2f} (|phi| >= {t.phi_high:.2f}): they may not be "
                                 f"distinct factors")
    flagged = [r["item"] for r in rows if "cross_loading" in r["flags"]]
    if flagged:
        notes.append(f"cross-loading items (judges may place them under either factor): {', '.join(flagged)}")
    cols = ["item", "text", "primary", "primary_loading", "secondary", "secondary_loading", "flags",
            "reverse_keyed"]
    items = pd.DataFrame([{k: r[k] for k in cols} for r in rows], columns=cols)
    factors = pd.DataFrame([{"factor": f, "name": names[f], "salient_items": counts[f], "flags": fflags[f]}
                            for f in ids], columns=["factor", "name", "salient_items", "flags"])
    return Diagnosis(items, factors, tuple(notes), t)
