"""Decision rules: the thresholds that turn statistics into keep / revise / drop and clear / ambiguous.

The defaults ship with the package (``labelstudy/defaults/rules.json``); on first use they are copied to
``PROJECT_DIR/rules.json``, which the researcher may edit. Every rule carries its value, a sentence saying
what it does and its source. Loading validates every key and value: an unknown key, a value of the wrong
type or out of range raises :class:`~labelstudy.errors.LabelstudyError` naming the key and the file.

Verdict logic (printed with the rules in every report):

Items
    *drop* when the hit ratio is below ``drop_hit_below`` **and** the I-CVI is below its standard (both
    must be measured); *revise* when any required check fails or the solution flags the item with one of
    ``revise_solution_flags``; *keep* otherwise. Required checks: the placement check named by
    ``placement_criterion`` (hit ratio at least ``item_hit_min``, csv significant at ``csv_alpha``, or
    both), the content-validity check named by ``relevance_criterion`` (I-CVI at its standard, CVR at its
    exact critical value, or both), and definition fit (a better fit to another definition always
    revises; "unclear" only when ``deffit_unclear_revises``). Checks that are measured but not required
    are printed beside the verdict ("noted: ..."), so nothing is hidden. Checks whose task was not part
    of the round are skipped. Why not every check at once: with ten judges the exact tests need nine of
    ten agreeing, so requiring all of them marks nearly every item for revision; which evidence is
    decisive is the researcher's documented choice.
Labels
    *overlapping with X* when the symmetric confusion rate with X is at least ``overlap_confusion_min``;
    *ambiguous* when the hit rate is below ``label_hit_min``, the normalised entropy of its placements is
    above ``label_entropy_max`` or the chosen name's mean clarity is below ``clarity_min``; *clear*
    otherwise.
"""

from __future__ import annotations

import hashlib
import json
import math
import shutil
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

import pandas as pd

from labelstudy.errors import LabelstudyError

__all__ = ["Rules", "RulesError", "load_rules", "default_rules", "parse_rules", "VERDICT_LOGIC",
           "SOLUTION_FLAGS"]

SOLUTION_FLAGS = ("cross_loading", "no_salient", "negative", "reverse_keyed")

VERDICT_LOGIC = (
    "Item drop: hit ratio below drop_hit_below and I-CVI below its standard (both measured).",
    "Item revise: a required check failed (the placement check of placement_criterion, the "
    "content-validity check of relevance_criterion, definition fit) or the factor solution flags the item "
    "with one of revise_solution_flags. Measured checks that are not required are noted beside the verdict.",
    "Item keep: every required check that was measured passed.",
    "Label overlapping with X: symmetric confusion rate with X at or above overlap_confusion_min.",
    "Label ambiguous: hit rate below label_hit_min, entropy above label_entropy_max, or mean clarity of "
    "the chosen name below clarity_min.",
    "Label clear: none of the above.",
)

# key -> (kind, low, high); kind "prob" = number in [low, high], "int", "num", "flags"
_SPEC: dict[str, tuple[str, float, float]] = {
    "icvi_min_large_panel": ("prob", 0, 1), "icvi_min_small_panel": ("prob", 0, 1),
    "icvi_small_panel_max": ("int", 1, 1000), "scvi_ave_min": ("prob", 0, 1),
    "cvr_alpha": ("prob", 1e-6, 0.5), "csv_alpha": ("prob", 1e-6, 0.5), "csv_p0": ("prob", 1e-6, 1 - 1e-6),
    "item_hit_min": ("prob", 0, 1), "drop_hit_below": ("prob", 0, 1), "label_hit_min": ("prob", 0, 1),
    "label_entropy_max": ("prob", 0, 1), "overlap_confusion_min": ("prob", 0, 1),
    "clarity_min": ("num", 1, 5), "deffit_alpha": ("prob", 1e-6, 0.5), "prevalence_gap": ("prob", 0, 2),
    "revise_solution_flags": ("flags", 0, 0), "judge_outlier_z": ("num", 0.5, 10),
    "alpha_n_boot": ("int", 0, 20000), "ci_level": ("prob", 0.5, 0.999),
    "placement_criterion": ("choice", 0, 0), "relevance_criterion": ("choice", 0, 0),
    "deffit_unclear_revises": ("bool", 0, 0),
}
_CHOICES = {"placement_criterion": ("hit_ratio", "csv", "both"), "relevance_criterion": ("icvi", "cvr", "both")}


class RulesError(LabelstudyError):
    """A rules file is unreadable or holds an unknown key or a bad value."""


@dataclass(frozen=True)
class Rules:
    """A validated rule set: ``values`` key -> value, ``texts`` and ``sources`` key -> words."""

    values: tuple[tuple[str, Any], ...]
    texts: tuple[tuple[str, str], ...]
    sources: tuple[tuple[str, str], ...]
    path: str = ""

    def __getitem__(self, key: str) -> Any:
        return dict(self.values)[key]

    @property
    def hash(self) -> str:
        """A short digest of the values (part of the results cache key)."""
        return hashlib.sha256(json.dumps(dict(self.values), sort_keys=True).encode()).hexdigest()[:16]

    def table(self) -> pd.DataFrame:
        """One row per rule: rule, value, what it does, source."""
        texts, sources = dict(self.texts), dict(self.sources)
        return pd.DataFrame([{"rule": k, "value": ", ".join(v) if isinstance(v, (list, tuple)) else v,
                              "meaning": texts.get(k, ""), "source": sources.get(k, "")}
                             for k, v in self.values])

    def to_dict(self) -> dict:
        texts, sources = dict(self.texts), dict(self.sources)
        return {k: {"value": list(v) if isinstance(v, tuple) else v, "text": texts.get(k, ""),
                    "source": sources.get(k, "")} for k, v in self.values}


def _default_text() -> str:
    return resources.files("labelstudy").joinpath("defaults/rules.json").read_text(encoding="utf-8")


def _check_value(key: str, value: Any, where: str) -> Any:
    kind, low, high = _SPEC[key]
    if kind == "flags":
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            raise RulesError(f"{where}: rule {key!r} must be a list of flag names")
        bad = [v for v in value if v not in SOLUTION_FLAGS]
        if bad:
            raise RulesError(f"{where}: rule {key!r} names unknown flag(s) {', '.join(bad)} "
                             f"(known: {', '.join(SOLUTION_FLAGS)})")
        return tuple(value)
    if kind == "choice":
        if value not in _CHOICES[key]:
            raise RulesError(f"{where}: rule {key!r} must be one of {', '.join(_CHOICES[key])}, not {value!r}")
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise RulesError(f"{where}: rule {key!r} must be true or false, not {value!r}")
        return value
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise RulesError(f"{where}: rule {key!r} must be a number, not {value!r}")
    if kind == "int":
        if int(value) != value:
            raise RulesError(f"{where}: rule {key!r} must be a whole number, not {value!r}")
        value = int(value)
    if not low <= value <= high:
        raise RulesError(f"{where}: rule {key!r} must lie between {low:g} and {high:g}, not {value!r}")
    return value if kind == "int" else float(value)


def parse_rules(text: str, *, where: str = "rules.json") -> Rules:
    """Validate a rules document (JSON text). Keys missing from it take the shipped default."""
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise RulesError(f"{where} is not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})") from None
    if not isinstance(doc, dict) or not isinstance(doc.get("rules"), dict):
        raise RulesError(f"{where}: expected an object with a \"rules\" object inside")
    extra = sorted(set(doc) - {"format", "version", "rules"})
    if extra:
        raise RulesError(f"{where}: unknown top-level key {extra[0]!r} (expected format, version, rules)")
    defaults = json.loads(_default_text())["rules"]
    values, texts, sources = [], [], []
    for key, entry in doc["rules"].items():
        if key not in _SPEC:
            raise RulesError(f"{where}: unknown rule {key!r} (known rules: {', '.join(_SPEC)})")
        if isinstance(entry, dict):
            unknown = sorted(set(entry) - {"value", "text", "source"})
            if unknown:
                raise RulesError(f"{where}: rule {key!r} has an unknown field {unknown[0]!r} "
                                 "(expected value, text, source)")
            if "value" not in entry:
                raise RulesError(f"{where}: rule {key!r} has no \"value\"")
        else:
            entry = {"value": entry}
    for key in _SPEC:
        entry = doc["rules"].get(key, defaults[key])
        if not isinstance(entry, dict):
            entry = {"value": entry}
        values.append((key, _check_value(key, entry["value"], where)))
        texts.append((key, str(entry.get("text", defaults[key]["text"]))))
        sources.append((key, str(entry.get("source", defaults[key]["source"]))))
    return Rules(tuple(values), tuple(texts), tuple(sources), where)


def default_rules() -> Rules:
    """The rule set shipped with labelstudy."""
    return parse_rules(_default_text(), where="default rules")


def load_rules(project_dir: str | Path) -> Rules:
    """Read ``PROJECT_DIR/rules.json``, copying the shipped defaults there first when it is missing."""
    path = Path(project_dir) / "rules.json"
    if not path.exists():
        try:
            with resources.as_file(resources.files("labelstudy").joinpath("defaults/rules.json")) as src:
                shutil.copyfile(src, path)
        except OSError as exc:
            raise RulesError(f"cannot write the default rules to {path} ({exc})") from None
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise RulesError(f"cannot read {path} ({exc})") from None
    return parse_rules(text, where=str(path))
