"""A seeded, simulated judge panel for demonstrations and tests.

:func:`simulate_panel` invents answers of a small expert panel to every task kind of
:mod:`labelstudy.tasks` for a given :class:`~labelstudy.solution.Solution`. The generative model is
deliberately simple and written down in ``sample_studies/community_orchards/README.md``:

* most items are placed under their intended factor (largest absolute loading) with probability
  ``p_correct`` (each judge's own accuracy is drawn uniformly within ``p_correct +/- 0.04``) and rated
  relevant (3-4 on the 4-point relevance scale);
* the two factors of ``confusable`` are often mistaken for each other: in label matching an item of one
  goes to the other with probability ``p_swap``, open-sort piles merge them with probability ``p_merge``,
  and an item of one rated against the other's definition gets a fit close to its own;
* every item of ``cross_loading`` is split between its intended and its second factor, rated lower on
  relevance and essentiality, and commented on;
* the judge at index ``outlier`` answers almost at random, chooses "none of these fits" often and
  answers quickly.

Everything is drawn from one ``numpy.random.default_rng(seed)`` in a fixed order, so the same inputs
give identical answers.

No real people: judge names are invented first names or anonymous codes.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np
import pandas as pd

from labelstudy.errors import LabelstudyError
from labelstudy.tasks import NONE_CODE, candidate_names, intended_key

__all__ = ["JudgeProfile", "SimulatedPanel", "simulate_panel", "orchard_panel", "secondary_factor",
           "export_panel", "JUDGE_PROFILES", "ANSWER_COLUMNS", "ORCHARD_CONFUSABLE", "ORCHARD_CROSS_LOADING",
           "ORCHARD_CANDIDATES", "ORCHARD_VOCABULARY", "ORCHARD_MERGED_NAMES", "ORCHARD_OUTLIER"]

ANSWER_COLUMNS = ["judge", "task_kind", "key", "value", "comment", "seconds"]


@dataclass(frozen=True)
class JudgeProfile:
    """An invented judge: a short code, the name shown to the researcher and a field of expertise."""

    code: str
    display_name: str
    expertise: str
    outlier: bool = False
    accuracy: float = 0.9


# Invented first names and anonymous codes (no real people).
JUDGE_PROFILES = (
    ("J01", "Ines", "community ecologist"),
    ("J02", "Tomasz", "volunteer coordinator"),
    ("J03", "Judge R4K", "survey methodologist"),
    ("J04", "Amara", "urban forester"),
    ("J05", "Leif", "environmental psychologist"),
    ("J06", "Judge 7QX", "allotment society organiser"),
    ("J07", "Odile", "horticulture tutor"),
    ("J08", "Judge M2P", "community development worker"),
    ("J09", "Sunniva", "psychometrician"),
    ("J10", "Kofi", "orchard volunteer of many seasons"),
    ("J11", "Judge 9TD", "social researcher"),
    ("J12", "Rosalind", "fruit-tree pruning instructor"),
)

# The community-orchard sample study (sample_studies/community_orchards): F2 "Neighbourly Ties" and
# F4 "Harvest Sharing" correlate .55 and both speak of neighbours; O14 loads .45 on F2 and .38 on F4.
ORCHARD_CONFUSABLE = ("F2", "F4")
ORCHARD_CROSS_LOADING = ("O14",)
ORCHARD_OUTLIER = 7          # index of "Judge M2P"
ORCHARD_CANDIDATES = {
    "F1": ["Learning Orchard Skills", "Growing Competence"],
    "F2": ["Social Connection", "Belonging"],
    "F3": ["Nature Stewardship", "Green Concern"],
    "F4": ["Food Sharing", "Community Giving"],
}
ORCHARD_VOCABULARY = {
    "F1": ["Learning skills", "Pruning and grafting", "Getting better at growing", "Know-how", "Skills"],
    "F2": ["Friends and neighbours", "Social side", "Meeting people", "Community", "Belonging"],
    "F3": ["Nature", "Looking after the environment", "Green space", "Bees, soil and trees", "Ecology"],
    "F4": ["Sharing the fruit", "Food for others", "Giving away the harvest", "No waste",
           "Fruit for the neighbourhood"],
}
ORCHARD_MERGED_NAMES = ("Community and sharing", "Neighbours and giving", "Helping the neighbourhood",
                        "Social / sharing")

# Seconds per answer unit (median of a log-normal with sigma .45).
_SECONDS = {"open_sort": 9.0, "pile": 12.0, "label_match": 8.0, "relevance": 5.0, "essentiality": 4.0,
            "definition_fit": 3.0, "name": 25.0, "choice": 6.0, "clarity": 4.0}


@dataclass(frozen=True)
class SimulatedPanel:
    """The simulated panel: judge profiles and their answers in long format.

    Attributes
    ----------
    judges : tuple of JudgeProfile
        In panel order; ``judges[i].code`` is the ``judge`` column of ``answers``.
    answers : pandas.DataFrame
        Columns ``judge, task_kind, key, value, comment, seconds``; keys follow the answer-key
        conventions of :mod:`labelstudy.tasks` (one row per judge x task kind x key).
    confusable : tuple of str
        The two factor ids planted as confusable.
    cross_loading : tuple of str
        The item ids planted as cross-loading.
    seed : int
        The seed of the generator.
    """

    judges: tuple[JudgeProfile, ...]
    answers: pd.DataFrame
    confusable: tuple[str, str]
    cross_loading: tuple[str, ...]
    seed: int

    @property
    def outlier(self) -> JudgeProfile:
        """The near-random judge."""
        return next(j for j in self.judges if j.outlier)

    def for_judge(self, code: str) -> pd.DataFrame:
        """The answers of one judge (by code)."""
        return self.answers[self.answers["judge"] == code]


def secondary_factor(item) -> str:
    """The factor with the second largest absolute loading of ``item`` (ties: the earlier factor)."""
    ranked = sorted(enumerate(item.loadings), key=lambda p: (-abs(p[1][1]), p[0]))
    return ranked[1][1][0]


def _pick(rng: np.random.Generator, options: Sequence[str], probs: Sequence[float]) -> str:
    p = np.asarray(probs, dtype=float)
    return options[int(rng.choice(len(options), p=p / p.sum()))]


def _placement(fids, intended, *, role, partner, second, accuracy, allow_none):
    """Where a careful judge puts an item: (options, probabilities) over ``fids`` (+ ``none``)."""
    if role == "cross":
        main, none_p = {intended: 0.45, second: 0.40}, 0.10
    elif role == "confusable":
        main, none_p = {intended: 0.60, partner: 0.32}, 0.03
    else:
        main, none_p = {intended: accuracy}, (1 - accuracy) * 0.3
    if not allow_none:
        none_p = 0.0
    others = [f for f in fids if f not in main]
    rest = max(1 - sum(main.values()) - none_p, 0.0)
    probs = {f: main.get(f, rest / len(others) if others else 0.0) for f in fids}
    if none_p:
        probs[NONE_CODE] = none_p
    keys = list(probs)
    return keys, [probs[k] for k in keys]


def _scale(rng, codes, probs) -> str:
    return _pick(rng, codes, probs)


def _fit(rng, mean: float) -> str:
    return str(int(np.clip(np.rint(rng.normal(mean, 0.7)), 1, 5)))


def _default_vocabulary(solution) -> dict[str, list[str]]:
    out = {}
    for f in solution.factors:
        words = f.name.split()
        out[f.id] = [f.name, f.name.lower(), f"{words[0]} things" if words else f.id,
                     f"about {f.name.lower()}"]
    return out


def simulate_panel(solution, *, n_judges: int = 12, seed: int = 2026,
                   confusable: tuple[str, str] = ORCHARD_CONFUSABLE,
                   cross_loading: Sequence[str] = ORCHARD_CROSS_LOADING, outlier: int = ORCHARD_OUTLIER, p_correct: float = 0.9,
                   p_merge: float = 0.65, max_piles: int = 12,
                   candidates: dict[str, list[str]] | None = None,
                   vocabulary: dict[str, list[str]] | None = None,
                   merged_names: Sequence[str] = ()) -> SimulatedPanel:
    """Simulate ``n_judges`` judges answering every task kind for ``solution``.

    Parameters
    ----------
    solution : labelstudy.solution.Solution
    n_judges : int
        Panel size, 2 to ``len(JUDGE_PROFILES)``.
    seed : int
        Seed of ``numpy.random.default_rng``.
    confusable : (str, str)
        Two factor ids the panel tends to confuse.
    cross_loading : sequence of str
        Item ids placed ambiguously between their first and second factor.
    outlier : int
        Index of the near-random judge (``-1`` for none).
    p_correct : float
        Mean probability that a careful judge places an ordinary item under its intended factor.
    p_merge : float
        Probability that a careful judge's open sort puts both confusable factors in one pile.
    max_piles : int
        The open sort's pile limit (pile numbers are drawn from 1..max_piles).
    candidates : dict, optional
        The naming task's alternative names per factor (as in the task config); the choice is drawn
        from :func:`labelstudy.tasks.candidate_names`.
    vocabulary : dict, optional
        Factor id -> invented pile names / proposed names; defaults to variations of the factor name.
    merged_names : sequence of str
        Pile names for a pile that merges the confusable pair.

    Returns
    -------
    SimulatedPanel

    Raises
    ------
    LabelstudyError
        When a factor or item id given does not exist in the solution or a number is out of range.
    """
    fids = [f.id for f in solution.factors]
    fmap = {f.id: f for f in solution.factors}
    imap = {it.id: it for it in solution.items}
    if len(confusable) != 2 or confusable[0] == confusable[1] or any(f not in fmap for f in confusable):
        raise LabelstudyError(f"confusable must name two different factors of the solution "
                              f"({', '.join(fids)}), not {tuple(confusable)!r}")
    bad = [i for i in cross_loading if i not in imap]
    if bad:
        raise LabelstudyError(f"cross-loading item(s) {', '.join(bad)} are not in the solution")
    if not 2 <= n_judges <= len(JUDGE_PROFILES):
        raise LabelstudyError(f"n_judges must lie between 2 and {len(JUDGE_PROFILES)}, not {n_judges}")
    if len(fids) < 2 or len(fids) > max_piles:
        raise LabelstudyError("the simulation needs at least two factors and no more factors than piles")
    if not 0.5 <= p_correct <= 0.99 or not 0 <= p_merge <= 1:
        raise LabelstudyError("p_correct must lie in [0.5, 0.99] and p_merge in [0, 1]")

    rng = np.random.default_rng(seed)
    key = intended_key(solution)
    cross = tuple(cross_loading)
    a, b = confusable
    partner = {a: b, b: a}
    vocab = {**_default_vocabulary(solution), **(vocabulary or {})}
    merged = list(merged_names) or [f"{fmap[a].name} and {fmap[b].name}", "looking after each other"]
    cands = {f.id: candidate_names({"candidates": candidates or {}}, f) for f in solution.factors}

    def role(item_id):
        if item_id in cross:
            return "cross"
        return "confusable" if key[item_id] in partner else "plain"

    judges = []
    for j in range(n_judges):
        code, name, field = JUDGE_PROFILES[j]
        acc = round(float(rng.uniform(p_correct - 0.04, min(p_correct + 0.04, 0.99))), 3)
        judges.append(JudgeProfile(code, name, field, outlier=(j == outlier), accuracy=acc))

    rows: list[tuple] = []

    def add(judge, kind, k, value, comment="", unit=None, slow=1.0):
        median = _SECONDS[unit or kind] * slow * (0.35 if judge.outlier else 1.0)
        secs = round(float(median * np.exp(rng.normal(0, 0.45))), 1)
        rows.append((judge.code, kind, k, value, comment, max(secs, 0.5)))

    items = [it.id for it in solution.items]
    for judge in judges:
        # ---- open sort: piles are factors (the confusable pair merged with probability p_merge)
        if judge.outlier:
            n = int(rng.integers(3, 7))
            numbers = [str(x) for x in rng.permutation(np.arange(1, max_piles + 1))[:n]]
            pile_of = {i: numbers[int(rng.integers(n))] for i in items}
            pile_name = {p: nm for p, nm in zip(numbers, ["mixed", "other", "not sure", "misc",
                                                          "the rest", "hmm"])}
        else:
            groups = [f for f in fids if f != b]
            merge = bool(rng.random() < p_merge)
            if not merge:
                groups.append(b)
            numbers = [str(x) for x in rng.permutation(np.arange(1, max_piles + 1))[:len(groups)]]
            pile_for = dict(zip(groups, numbers))
            if merge:
                pile_for[b] = pile_for[a]
            pile_of = {}
            for i in items:
                r = role(i)
                opts, probs = _placement(fids, key[i], role=r, partner=partner.get(key[i]),
                                         second=secondary_factor(imap[i]), accuracy=judge.accuracy,
                                         allow_none=False)
                if r == "confusable":   # open sorts split pairs a little less than closed sorts
                    probs = [p * (0.8 if o == partner[key[i]] else 1.0) for o, p in zip(opts, probs)]
                pile_of[i] = pile_for[_pick(rng, opts, probs)]
            pile_name = {}
            for f in groups:
                names = merged if (merge and f == a) else vocab[f]
                pile_name[pile_for[f]] = names[int(rng.integers(len(names)))]
        for i in items:
            add(judge, "open_sort", i, pile_of[i], slow=1.5 if role(i) != "plain" else 1.0)
        for p in sorted(set(pile_of.values()), key=int):
            add(judge, "open_sort", f"pile:{p}", pile_name[p], unit="pile")

        # ---- label matching
        for i in items:
            r = role(i)
            if judge.outlier:
                opts, probs = fids + [NONE_CODE], [0.55 / len(fids)] * len(fids) + [0.45]
            else:
                opts, probs = _placement(fids, key[i], role=r, partner=partner.get(key[i]),
                                         second=secondary_factor(imap[i]), accuracy=judge.accuracy,
                                         allow_none=True)
            comment = ""
            if r == "cross" and not judge.outlier and rng.random() < 0.4:
                s = fmap[secondary_factor(imap[i])].name
                comment = [f"Could belong under {s} just as well.",
                           f"Half {fmap[key[i]].name}, half {s}.",
                           "Two ideas in one statement; I had to choose."][int(rng.integers(3))]
            add(judge, "label_match", i, _pick(rng, opts, probs), comment, slow=1.6 if r != "plain" else 1.0)

        # ---- relevance (1-4) and essentiality (1-3) against the intended factor
        for i in items:
            r = "outlier" if judge.outlier else role(i)
            probs = {"plain": [.01, .02, .27, .70], "confusable": [.02, .05, .38, .55],
                     "cross": [.28, .42, .22, .08], "outlier": [.25, .25, .25, .25]}[r]
            value = _scale(rng, ["1", "2", "3", "4"], probs)
            comment = ""
            if r == "cross" and value in ("1", "2") and rng.random() < 0.5:
                comment = "Relevant only in part: it mixes two things."
            add(judge, "relevance", i, value, comment)
        for i in items:
            r = "outlier" if judge.outlier else role(i)
            probs = {"plain": [.04, .14, .82], "confusable": [.06, .22, .72],
                     "cross": [.30, .45, .25], "outlier": [1 / 3, 1 / 3, 1 / 3]}[r]
            add(judge, "essentiality", i, _scale(rng, ["1", "2", "3"], probs))

        # ---- definition fit (1-5) of every item against every definition
        for i in items:
            r, f0, s = role(i), key[i], secondary_factor(imap[i])
            for f in fids:
                if judge.outlier:
                    value = str(int(rng.integers(1, 6)))
                else:
                    if f == f0:
                        mean = 3.6 if r == "cross" else 4.3 if r == "confusable" else 4.5
                    elif r == "cross" and f == s:
                        mean = 3.7
                    elif r == "confusable" and f == partner[f0]:
                        mean = 3.9
                    else:
                        mean = 1.5
                    value = _fit(rng, mean)
                add(judge, "definition_fit", f"{i}|{f}", value)

        # ---- naming: a proposed name, a choice among candidates, clarity 1-5
        for f in fids:
            pair = f in partner
            if judge.outlier:
                proposed = ["no idea", "groups", "various"][int(rng.integers(3))]
            elif pair and rng.random() < 0.35:
                proposed = merged[int(rng.integers(len(merged)))]
            else:
                proposed = vocab[f][int(rng.integers(len(vocab[f])))]
            add(judge, "naming", f"{f}|name", proposed, unit="name")
            options = cands[f]
            if judge.outlier or len(options) == 1:
                probs = [1.0] * len(options)
            else:
                first = 0.40 if pair else 0.65
                probs = [first] + [(1 - first) / (len(options) - 1)] * (len(options) - 1)
            add(judge, "naming", f"{f}|choice", _pick(rng, options, probs), unit="choice")
            if judge.outlier:
                clarity = str(int(rng.integers(1, 6)))
            else:
                clarity = _fit(rng, 2.9 if pair else 4.3)
            comment = ""
            if pair and not judge.outlier and rng.random() < 0.3:
                comment = (f"Hard to tell apart from {fmap[partner[f]].name}; "
                           "the two definitions overlap.")
            add(judge, "naming", f"{f}|clarity", clarity, comment, unit="clarity")

    answers = pd.DataFrame(rows, columns=ANSWER_COLUMNS)
    return SimulatedPanel(judges=tuple(judges), answers=answers, confusable=(a, b), cross_loading=cross,
                          seed=seed)


def orchard_panel(solution, *, n_judges: int = 12, seed: int = 2026, max_piles: int = 8) -> SimulatedPanel:
    """The panel of the community-orchard sample study: :func:`simulate_panel` with the orchard's planted
    pair, cross-loading item, outlier, naming candidates and pile vocabulary."""
    return simulate_panel(solution, n_judges=n_judges, seed=seed, confusable=ORCHARD_CONFUSABLE,
                          cross_loading=ORCHARD_CROSS_LOADING, outlier=ORCHARD_OUTLIER,
                          candidates=ORCHARD_CANDIDATES, vocabulary=ORCHARD_VOCABULARY,
                          merged_names=ORCHARD_MERGED_NAMES, max_piles=max_piles)


def export_panel(panel: SimulatedPanel, folder: str | Path) -> tuple[Path, Path]:
    """Write ``judges.csv`` and ``answers.csv`` (UTF-8, comma separated) into ``folder``."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    judges = folder / "judges.csv"
    with judges.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["judge", "display_name", "expertise", "outlier", "accuracy"])
        for j in panel.judges:
            w.writerow([j.code, j.display_name, j.expertise, int(j.outlier), f"{j.accuracy:.3f}"])
    answers = folder / "answers.csv"
    panel.answers.to_csv(answers, index=False, lineterminator="\n", float_format="%.1f")
    return judges, answers
