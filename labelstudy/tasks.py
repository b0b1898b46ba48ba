"""Judge tasks: what each task kind asks, in which order a judge sees it, and what an answer may be.

Pure logic shared by the web form (rendering and checking answers) and the scoring (reading them back).

Task kinds (terms of the trade, explained once):

``open_sort``
    Open card sort. The judge groups the items into piles of their own and names each pile; no factor
    names are shown. Answer keys: ``<item id>`` -> pile number ("1", "2", ...); ``pile:<n>`` -> the
    judge's name for pile n.
``label_match``
    Closed sort. Each item goes to one factor, or to "none of these fits" (code ``none``). The config's
    ``show`` says what the judge sees of each factor: ``name``, ``definition`` or ``both``.
    Answer keys: ``<item id>`` -> factor id or ``none``.
``relevance``
    Each item against its intended factor's definition on the 4-point relevance scale used for the
    I-CVI (1 not relevant, 2 somewhat relevant, 3 quite relevant, 4 highly relevant; Lynn 1986).
``essentiality``
    Each item on Lawshe's (1975) 3-point scale used for the CVR: 3 essential, 2 useful but not
    essential, 1 not necessary.
``definition_fit``
    Each item rated against every factor definition, 1 (not at all) to 5 (completely)
    (Hinkin & Tracey 1999). Answer keys: ``<item id>|<factor id>``.
``naming``
    For each factor the judge sees its items, proposes a name (``<factor id>|name``, free text), picks
    the best candidate (``<factor id>|choice``, the candidate's text) and rates its clarity
    (``<factor id>|clarity``, 1 very unclear to 5 very clear).

Every answer row may also carry a free comment (the store's ``comment`` column).

Order: items (and the factor options where the kind has them) are shuffled per judge by a generator
seeded from the round's stored seed, the judge id and the task position, so every judge's order can be
reproduced later (:func:`item_order`).
"""

from __future__ import annotations

import random
from dataclasses import dataclass, field
from typing import Any, Sequence

from labelstudy.errors import FormInputError

TASK_LABELS = {
    "open_sort": "Open sort: group the statements into piles of your own",
    "label_match": "Label matching: place each statement under one factor",
    "relevance": "Relevance rating: how relevant is each statement to its factor",
    "essentiality": "Essentiality rating: is each statement essential to its factor",
    "definition_fit": "Definition fit: rate each statement against every definition",
    "naming": "Naming: propose and choose a name for each group of statements",
}
NONE_CODE = "none"
NONE_LABEL = "None of these fits"
RELEVANCE_SCALE = (("1", "Not relevant"), ("2", "Somewhat relevant"), ("3", "Quite relevant"),
                   ("4", "Highly relevant"))
ESSENTIALITY_SCALE = (("3", "Essential"), ("2", "Useful but not essential"), ("1", "Not necessary"))
FIT_SCALE = (("1", "1 not at all"), ("2", "2"), ("3", "3"), ("4", "4"), ("5", "5 completely"))
CLARITY_SCALE = (("1", "1 very unclear"), ("2", "2"), ("3", "3"), ("4", "4"), ("5", "5 very clear"))
SHOW_CHOICES = ("name", "definition", "both")
MAX_TEXT = 2000      # characters for a comment or a proposed name
MAX_PILES = 40
DEFAULT_CONFIG = {
    "open_sort": {"max_piles": 12},
    "label_match": {"show": "both", "none_option": True, "shuffle_options": True},
    "relevance": {},
    "essentiality": {},
    "definition_fit": {"shuffle_options": True},
    "naming": {"candidates": {}},
}


def intended_key(solution) -> dict[str, str]:
    """Item id -> intended factor id: the factor with the largest absolute loading (ties: first factor).

    This is the same rule as the primary factor of :func:`labelstudy.solution.diagnose`.
    """
    key = {}
    for item in solution.items:
        best, best_abs = None, -1.0
        for fid, value in item.loadings:
            if abs(value) > best_abs:
                best, best_abs = fid, abs(value)
        key[item.id] = best
    return key


def _rng(seed: int, judge_id: int, position: int, what: str) -> random.Random:
    return random.Random(f"labelstudy:{seed}:{judge_id}:{position}:{what}")


def item_order(seed: int, judge_id: int, position: int, ids: Sequence[str]) -> list[str]:
    """The order in which judge ``judge_id`` sees ``ids`` in the task at ``position`` (reproducible)."""
    out = list(ids)
    _rng(seed, judge_id, position, "items").shuffle(out)
    return out


def option_order(seed: int, judge_id: int, position: int, ids: Sequence[str], what: str = "options") -> list[str]:
    out = list(ids)
    _rng(seed, judge_id, position, what).shuffle(out)
    return out


@dataclass(frozen=True)
class Unit:
    """One answer a judge is asked for: its key, the statement or factor it concerns and its choices."""

    key: str
    kind: str
    item_id: str | None = None
    factor_id: str | None = None
    facet: str = ""                                   # "", "name", "choice", "clarity", "pile"
    choices: tuple[tuple[str, str], ...] = ()          # (code, label); empty = free text
    required: bool = True


@dataclass(frozen=True)
class TaskView:
    """A task as one judge sees it: the task row, the units in the judge's order and the options."""

    task_id: int
    position: int
    kind: str
    config: dict
    units: tuple[Unit, ...]
    factor_options: tuple[tuple[str, str, str], ...] = ()   # (factor id, name shown, definition shown)
    groups: tuple[tuple[str, tuple[str, ...]], ...] = field(default=())  # naming: factor -> its items

    @property
    def required_keys(self) -> tuple[str, ...]:
        return tuple(u.key for u in self.units if u.required)


def normalise_config(kind: str, config: dict | None) -> dict:
    """The task's config with defaults filled in and every value checked (FormInputError if wrong)."""
    if kind not in DEFAULT_CONFIG:
        raise FormInputError(f"unknown task kind {kind!r}; choose one of {', '.join(DEFAULT_CONFIG)}")
    cfg = {**DEFAULT_CONFIG[kind], **(config or {})}
    if kind == "label_match" and cfg["show"] not in SHOW_CHOICES:
        raise FormInputError(f"label matching: 'show' must be one of {', '.join(SHOW_CHOICES)}")
    if kind == "open_sort":
        try:
            cfg["max_piles"] = int(cfg["max_piles"])
        except (TypeError, ValueError):
            raise FormInputError("open sort: the number of piles must be a whole number") from None
        if not 2 <= cfg["max_piles"] <= MAX_PILES:
            raise FormInputError(f"open sort: the number of piles must be between 2 and {MAX_PILES}")
    if kind == "naming":
        cands = cfg.get("candidates") or {}
        if not isinstance(cands, dict):
            raise FormInputError("naming: candidates must map factor ids to lists of names")
        cfg["candidates"] = {str(k): [str(n).strip() for n in v if str(n).strip()] for k, v in cands.items()}
    return cfg


def build_view(task: dict, solution, *, seed: int, judge_id: int) -> TaskView:
    """Lay out ``task`` (a store row with ``id``, ``position``, ``kind``, ``config``) for one judge."""
    kind, pos = task["kind"], task["position"]
    cfg = normalise_config(kind, task.get("config"))
    item_ids = item_order(seed, judge_id, pos, [it.id for it in solution.items])
    factors = list(solution.factors)
    fids = [f.id for f in factors]
    if cfg.get("shuffle_options"):
        fids = option_order(seed, judge_id, pos, fids)
    fmap = {f.id: f for f in factors}
    show = cfg.get("show", "both")
    options = tuple((fid, fmap[fid].name if show in ("name", "both") else "",
                     fmap[fid].definition if show in ("definition", "both") else "") for fid in fids)
    units: list[Unit] = []
    groups: tuple = ()
    if kind == "open_sort":
        piles = tuple((str(n), f"Pile {n}") for n in range(1, cfg["max_piles"] + 1))
        units = [Unit(i, kind, item_id=i, choices=piles) for i in item_ids]
        units += [Unit(f"pile:{n}", kind, facet="pile", required=False) for n, _ in piles]
    elif kind == "label_match":
        choices = tuple((fid, _factor_label(fmap[fid], show)) for fid in fids)
        if cfg.get("none_option", True):
            choices += ((NONE_CODE, NONE_LABEL),)
        units = [Unit(i, kind, item_id=i, choices=choices) for i in item_ids]
    elif kind in ("relevance", "essentiality"):
        key = intended_key(solution)
        scale = RELEVANCE_SCALE if kind == "relevance" else ESSENTIALITY_SCALE
        units = [Unit(i, kind, item_id=i, factor_id=key[i], choices=scale) for i in item_ids]
    elif kind == "definition_fit":
        units = [Unit(f"{i}|{fid}", kind, item_id=i, factor_id=fid, choices=FIT_SCALE)
                 for i in item_ids for fid in fids]
    elif kind == "naming":
        key = intended_key(solution)
        order = option_order(seed, judge_id, pos, [f.id for f in factors], "factors")
        groups = tuple((fid, tuple(i for i in item_ids if key[i] == fid)) for fid in order)
        for fid in order:
            cands = candidate_names(cfg, fmap[fid])
            cands = option_order(seed, judge_id, pos, cands, f"candidates:{fid}")
            units += [Unit(f"{fid}|name", kind, factor_id=fid, facet="name"),
                      Unit(f"{fid}|choice", kind, factor_id=fid, facet="choice",
                           choices=tuple((c, c) for c in cands)),
                      Unit(f"{fid}|clarity", kind, factor_id=fid, facet="clarity", choices=CLARITY_SCALE)]
    return TaskView(task_id=task["id"], position=pos, kind=kind, config=cfg, units=tuple(units),
                    factor_options=options, groups=groups)


def _factor_label(factor, show: str) -> str:
    if show == "name":
        return factor.name
    if show == "definition":
        return factor.definition or factor.name
    return f"{factor.name}: {factor.definition}" if factor.definition else factor.name


def candidate_names(cfg: dict, factor) -> list[str]:
    """The researcher's name for the factor followed by the configured alternatives (no duplicates)."""
    names = [factor.name] + list(cfg.get("candidates", {}).get(factor.id, []))
    seen, out = set(), []
    for n in names:
        if n.casefold() not in seen:
            seen.add(n.casefold())
            out.append(n)
    return out


def check_answer(view: TaskView, key: str, value: Any, comment: Any = "") -> tuple[str | None, str]:
    """Validate one answer for ``view``; returns (value or None, comment) or raises FormInputError.

    An empty value with a comment is allowed (a comment-only save); the message names the field.
    """
    unit = next((u for u in view.units if u.key == key), None)
    if unit is None:
        raise FormInputError(f"{key!r} is not a question of this task")
    if comment is None:
        comment = ""
    if not isinstance(comment, str):
        raise FormInputError("the comment must be text")
    comment = comment.strip()
    if len(comment) > MAX_TEXT:
        raise FormInputError(f"the comment is too long ({len(comment)} characters; at most {MAX_TEXT})")
    if value is None or (isinstance(value, str) and value.strip() == ""):
        return None, comment
    if not isinstance(value, (str, int)) or isinstance(value, bool):
        raise FormInputError(f"the answer to {key!r} must be text")
    value = str(value).strip()
    if unit.choices:
        codes = {c for c, _ in unit.choices}
        if value not in codes:
            raise FormInputError(f"{value[:40]!r} is not one of the choices offered for {key!r}")
    elif len(value) > MAX_TEXT:
        raise FormInputError(f"the answer to {key!r} is too long (at most {MAX_TEXT} characters)")
    return value, comment


def progress(views: Sequence[TaskView], answers: dict[tuple[int, str], Any]) -> tuple[int, int]:
    """(answered, required) over all tasks; ``answers`` maps (task id, key) -> value (None = unanswered)."""
    required = answered = 0
    for v in views:
        for k in v.required_keys:
            required += 1
            if answers.get((v.task_id, k)) not in (None, ""):
                answered += 1
    return answered, required
