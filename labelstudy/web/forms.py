"""Parsing and checking of the researcher's forms (no Flask request objects here, only mappings).

Each parser takes the submitted fields and returns clean values, or raises
:class:`~labelstudy.errors.FormInputError` whose message names the field (or the line) that is wrong, so the
page can show it beside the kept input. CSRF tokens are checked globally by Flask-WTF's ``CSRFProtect``;
templates carry them as ``{{ csrf_token() }}`` hidden fields.
"""

from __future__ import annotations

import datetime as _dt
import re
from dataclasses import dataclass
from typing import Mapping, Sequence

from labelstudy.errors import FormInputError
from labelstudy.tasks import DEFAULT_CONFIG, MAX_PILES, SHOW_CHOICES, TASK_LABELS, normalise_config

__all__ = ["JudgeRow", "parse_judge_lines", "RoundPlan", "parse_round_form", "round_form_defaults",
           "parse_panel_size", "DEFAULT_INSTRUCTIONS", "DEFAULT_CONSENT", "TASK_ORDER", "MAX_JUDGE_LINES",
           "missing_definitions"]

TASK_ORDER = tuple(DEFAULT_CONFIG)           # the order tasks are listed in on the compose page
DEFAULT_TASKS = ("label_match", "relevance")  # ticked when the compose page first opens
MAX_JUDGE_LINES = 500
MAX_NAME = 120
MAX_FIELD = 200
MAX_LONG_TEXT = 20000
MAX_PANEL = 500
_EMAIL = re.compile(r"^[^@\s,]+@[^@\s,]+\.[^@\s,]+$")

DEFAULT_INSTRUCTIONS = (
    "Thank you for taking part as an expert judge. You will see short statements from a questionnaire and "
    "a few tasks about them: for example placing each statement under the group it belongs to, or rating "
    "how well it fits a description. There are no right or wrong answers; we want your own expert view.\n\n"
    "Your answers are saved as you go, so you can stop and come back later with the same link. You can "
    "add a comment to any statement. When you have finished, review your answers and press Submit.")
DEFAULT_CONSENT = (
    "Your answers will be used only to check how clearly the statements and group descriptions of this "
    "questionnaire are understood. They are stored with the name or code shown on your invitation and are "
    "reported only in summaries; comments may be quoted without your name. Taking part is voluntary: you "
    "may stop at any time, and you may ask the researcher to delete your answers.\n\n"
    "By continuing you agree to take part on these terms.")


@dataclass(frozen=True)
class JudgeRow:
    """One judge as typed into the add-judges box."""

    line: int
    display_name: str
    email: str
    expertise: str


def parse_judge_lines(text: str, existing_names: Sequence[str] = ()) -> list[JudgeRow]:
    """Read one judge per line: ``display name, e-mail, expertise`` (e-mail and expertise optional).

    With two fields the second is read as the e-mail when it looks like one, else as the expertise. An
    anonymous code ("J07") is a valid display name. Blank lines are skipped. Every line is checked before
    any is returned; the first problem raises FormInputError naming its line number.

    >>> [r.display_name for r in parse_judge_lines("Ada Orchard, ada@example.org, pruning\\n\\nJ02")]
    ['Ada Orchard', 'J02']
    >>> parse_judge_lines("Ben, grafting")[0].expertise
    'grafting'
    """
    rows: list[JudgeRow] = []
    seen = {n.strip().casefold(): "already on this round's panel" for n in existing_names}
    lines = (text or "").splitlines()
    if sum(1 for ln in lines if ln.strip()) > MAX_JUDGE_LINES:
        raise FormInputError(f"at most {MAX_JUDGE_LINES} judges can be added at once")
    for n, raw in enumerate(lines, start=1):
        if not raw.strip():
            continue
        parts = [p.strip() for p in raw.split(",")]
        if len(parts) > 3:
            raise FormInputError(f"line {n}: {len(parts)} fields separated by commas; write at most three: "
                                 "display name, e-mail, expertise (no commas inside a field)")
        name = parts[0]
        email = expertise = ""
        if len(parts) == 2:
            if "@" in parts[1]:
                email = parts[1]
            else:
                expertise = parts[1]
        elif len(parts) == 3:
            email, expertise = parts[1], parts[2]
        if not name:
            raise FormInputError(f"line {n}: the display name (or an anonymous code) is missing before "
                                 "the first comma")
        if len(name) > MAX_NAME:
            raise FormInputError(f"line {n}: the display name is longer than {MAX_NAME} characters")
        if email and not _EMAIL.match(email):
            raise FormInputError(f"line {n}: {email[:60]!r} is not an e-mail address (leave it empty if "
                                 "there is none, as in 'name, , expertise')")
        if len(email) > MAX_FIELD or len(expertise) > MAX_FIELD:
            raise FormInputError(f"line {n}: the e-mail or the expertise is longer than {MAX_FIELD} "
                                 "characters")
        key = name.casefold()
        if key in seen:
            raise FormInputError(f"line {n}: {name!r} is {seen[key]}; give each judge a distinct name or "
                                 "code")
        seen[key] = f"also on line {n}"
        rows.append(JudgeRow(n, name, email, expertise))
    if not rows:
        raise FormInputError("no judges given: write one judge per line")
    return rows


def parse_panel_size(value: str | None) -> int:
    """A panel size from a form or query string: a whole number from 2 to MAX_PANEL."""
    try:
        n = int(str(value).strip())
    except (TypeError, ValueError):
        raise FormInputError(f"the number of judges must be a whole number, not {str(value)[:20]!r}") from None
    if not 2 <= n <= MAX_PANEL:
        raise FormInputError(f"the number of judges must be between 2 and {MAX_PANEL}")
    return n


@dataclass(frozen=True)
class RoundPlan:
    """A checked compose-round form, ready for ``Store.create_round``."""

    tasks: tuple[tuple[str, dict], ...]
    title: str
    instructions: str
    consent: str
    deadline: str | None


def round_form_defaults(factors: Sequence[dict], number: int) -> dict:
    """Field values for a fresh compose-round page (the same names the form posts)."""
    values: dict[str, str] = {"title": f"Round {number}", "show": DEFAULT_CONFIG["label_match"]["show"],
                              "max_piles": str(DEFAULT_CONFIG["open_sort"]["max_piles"]),
                              "none_option": "on", "instructions": DEFAULT_INSTRUCTIONS,
                              "consent": DEFAULT_CONSENT, "deadline": ""}
    for k, kind in enumerate(TASK_ORDER, start=1):
        values[f"order_{kind}"] = str(k)
        if kind in DEFAULT_TASKS:
            values[f"task_{kind}"] = "on"
    for f in factors:
        values[f"candidates_{f['factor_id']}"] = ""
    return values


def round_form_from(previous: dict, tasks: Sequence[dict], factors: Sequence[dict], number: int) -> dict:
    """Field values that repeat an earlier round's design (tasks, order, settings, texts) for round
    ``number``, so a second round after revisions asks the same questions and can be compared."""
    values = round_form_defaults(factors, number)
    for kind in TASK_ORDER:
        values.pop(f"task_{kind}", None)
    for pos, t in enumerate(tasks, start=1):
        kind, cfg = t["kind"], t.get("config") or {}
        values[f"task_{kind}"] = "on"
        values[f"order_{kind}"] = str(pos)
        if kind == "label_match":
            values["show"] = cfg.get("show", values["show"])
            if cfg.get("none_option", True):
                values["none_option"] = "on"
            else:
                values.pop("none_option", None)
        elif kind == "open_sort":
            values["max_piles"] = str(cfg.get("max_piles", values["max_piles"]))
        elif kind == "naming":
            for fid, names in (cfg.get("candidates") or {}).items():
                values[f"candidates_{fid}"] = "\n".join(names)
    values["instructions"] = previous.get("instructions") or values["instructions"]
    values["consent"] = previous.get("consent") or values["consent"]
    return values


def _text(form: Mapping[str, str], name: str, label: str, limit: int) -> str:
    value = (form.get(name) or "").replace("\r\n", "\n").strip()
    if len(value) > limit:
        raise FormInputError(f"{label} is longer than {limit} characters")
    return value


def parse_round_form(form: Mapping[str, str], factors: Sequence[dict], *,
                     today: _dt.date | None = None) -> RoundPlan:
    """Check the compose-round form; every problem found is listed in one FormInputError.

    ``factors`` are the study's factor rows (``factor_id``, ``name``); naming candidates are read from
    ``candidates_<factor id>`` (one alternative name per line).
    """
    errors: list[str] = []
    chosen: list[tuple[int, int, str]] = []
    for k, kind in enumerate(TASK_ORDER):
        if not form.get(f"task_{kind}"):
            continue
        raw = (form.get(f"order_{kind}") or "").strip()
        try:
            pos = int(raw) if raw else k + 1
        except ValueError:
            errors.append(f"{TASK_LABELS[kind].split(':')[0]}: the order must be a whole number, not {raw[:20]!r}")
            continue
        chosen.append((pos, k, kind))
    if not chosen and not errors:
        errors.append("choose at least one task")
    chosen.sort()
    tasks: list[tuple[str, dict]] = []
    for _, _, kind in chosen:
        cfg: dict = {}
        if kind == "label_match":
            show = form.get("show") or ""
            if show not in SHOW_CHOICES:
                errors.append(f"label matching: choose what judges see of each factor ({', '.join(SHOW_CHOICES)})")
                continue
            cfg = {"show": show, "none_option": bool(form.get("none_option"))}
        elif kind == "open_sort":
            cfg = {"max_piles": (form.get("max_piles") or "").strip()}
        elif kind == "naming":
            cands = {}
            for f in factors:
                names = _text(form, f"candidates_{f['factor_id']}", f"naming candidates for {f['name']}", 5000)
                lines = [ln.strip() for ln in names.splitlines() if ln.strip()]
                too_long = [ln for ln in lines if len(ln) > MAX_NAME]
                if too_long:
                    errors.append(f"naming candidates for {f['name']}: {too_long[0][:30]!r}... is longer than "
                                  f"{MAX_NAME} characters")
                cands[f["factor_id"]] = lines
            cfg = {"candidates": cands}
        try:
            tasks.append((kind, normalise_config(kind, cfg)))
        except FormInputError as exc:
            if kind == "open_sort":
                errors.append(f"open sort: the pile limit must be a whole number from 2 to {MAX_PILES}")
            else:
                errors.append(str(exc))
    try:
        title = _text(form, "title", "the title", MAX_FIELD)
        instructions = _text(form, "instructions", "the instructions", MAX_LONG_TEXT)
        consent = _text(form, "consent", "the consent text", MAX_LONG_TEXT)
    except FormInputError as exc:
        errors.append(str(exc))
        title = instructions = consent = ""
    if not instructions and not errors:
        errors.append("the instructions are empty; judges need to know what to do")
    if not consent and not errors:
        errors.append("the consent text is empty; judges must be told how their answers are used")
    deadline = (form.get("deadline") or "").strip() or None
    if deadline is not None:
        try:
            day = _dt.date.fromisoformat(deadline)
        except ValueError:
            errors.append(f"the deadline {deadline[:20]!r} is not a date (YYYY-MM-DD)")
        else:
            if day < (today or _dt.date.today()):
                errors.append(f"the deadline {deadline} is in the past")
            deadline = day.isoformat()
    if errors:
        raise FormInputError("; ".join(errors))
    return RoundPlan(tuple(tasks), title, instructions, consent, deadline)


def missing_definitions(tasks: Sequence[dict], factors: Sequence) -> tuple[list[str], list[str]]:
    """(task labels that show definitions, names of factors without one), for the opening check.

    ``tasks`` are store rows (``kind``, ``config``); ``factors`` are :class:`~labelstudy.solution.Factor`
    records. Label matching needs definitions when it shows them (``definition`` or ``both``), and
    definition fit always rates against definitions.
    """
    needing = []
    for t in tasks:
        cfg = normalise_config(t["kind"], t.get("config"))
        if (t["kind"] == "label_match" and cfg["show"] in ("definition", "both")) or t["kind"] == "definition_fit":
            needing.append(TASK_LABELS[t["kind"]].split(":")[0])
    empty = [f.name for f in factors if not (f.definition or "").strip()]
    return (needing, empty) if needing and empty else ([], [])
