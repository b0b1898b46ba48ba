"""The judge side of the web form: personal link, consent, tasks, review, submit.

The token in the URL is the credential; no login and no state in cookies. Every POST carries a link-bound
token, ``HMAC-SHA256(SECRET_KEY, "judge-form:" + link token)`` (hex), in the form field ``csrf_token`` or
the header ``X-CSRF-Token`` (:func:`judge_csrf_token`); it is valid for the life of the link.

Pages work without JavaScript (one ``<form method=post>`` per task, saved in one transaction, then a
redirect). With JavaScript (``static/judge.js``) every change is also saved at once through
``POST /j/<token>/save`` (JSON) and reconciled on reload through ``GET /j/<token>/state``.

Task pages are numbered from 1 in the round's order: ``/j/<token>/task/1`` is the first task.
Form fields of a task page: ``v__<key>`` (the answer), ``c__<key>`` (the comment) and ``rev__<key>`` (the
stored revision when the page was drawn), where ``<key>`` is the answer key of :mod:`labelstudy.tasks`.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import hmac
import json
import math
import threading
from dataclasses import dataclass
from typing import Any

from flask import Blueprint, abort, current_app, jsonify, redirect, render_template, request, url_for

from labelstudy import tasks as T
from labelstudy.errors import (FormInputError, LabelstudyError, NotFoundError, StateError,
                               StorageUnavailableError)
from labelstudy.web import NOT_SAVED_RETRYING, get_store

__all__ = ["bp", "judge_csrf_token", "JudgeContext", "load_context"]

bp = Blueprint("judge", __name__, url_prefix="/j")

UNAVAILABLE_MESSAGE = ("This link is not active. It may be mistyped, or the study round is not open. If you "
                       "think this is a mistake, please contact the researcher who sent it.")
REVOKED_MESSAGE = ("This link was withdrawn by the researcher, so answers can no longer be given with it. "
                   "If you think this is a mistake, please contact the researcher.")
CSRF_MESSAGE = ("Your answers were not saved: the page's security check did not match this link. They are "
                "still filled in below; please press the button again.")
MAX_SECONDS = 7 * 24 * 3600.0
MAX_REVISION = 2**31 - 1


class _Refused(Exception):
    """The link cannot be used: ``kind`` is 'unavailable' (unknown token, closed or draft round) or 'revoked'."""

    def __init__(self, kind: str):
        super().__init__(kind)
        self.kind = kind


def judge_csrf_token(token: str) -> str:
    """The link-bound form token: hex HMAC-SHA256 of ``"judge-form:" + token`` under the app's SECRET_KEY."""
    key = current_app.config["SECRET_KEY"]
    if isinstance(key, str):
        key = key.encode("utf-8")
    msg = ("judge-form:" + token).encode("utf-8", "surrogatepass")
    return hmac.new(key, msg, hashlib.sha256).hexdigest()


def _csrf_ok(token: str, sent: Any) -> bool:
    if not isinstance(sent, str) or not sent:
        return False
    return hmac.compare_digest(sent.encode("utf-8", "surrogatepass"), judge_csrf_token(token).encode("ascii"))


@dataclass(frozen=True)
class JudgeContext:
    """Everything a judge page needs: the invitation, round, study, frozen solution, views and answers."""

    token: str
    inv: dict
    rnd: dict
    study: dict
    solution: Any
    views: tuple
    answers: dict          # (task id, key) -> answer row

    @property
    def judge_id(self) -> int:
        return self.inv["judge_id"]

    @property
    def round_id(self) -> int:
        return self.inv["round_id"]

    @property
    def submitted(self) -> bool:
        return bool(self.inv["submitted_at"])

    @property
    def consented(self) -> bool:
        return bool(self.inv["consented_at"])

    def values(self) -> dict:
        return {k: a["value"] for k, a in self.answers.items()}

    def progress(self) -> tuple[int, int]:
        return T.progress(self.views, self.values())

    def view_at(self, n: int):
        if not 1 <= n <= len(self.views):
            abort(404)
        return self.views[n - 1]

    def missing(self, view) -> list[str]:
        vals = self.values()
        return [k for k in view.required_keys if vals.get((view.task_id, k)) in (None, "")]

    def deadline_passed(self) -> bool:
        return _deadline_passed(self.rnd.get("deadline"))


_VIEWS_CACHE: dict = {}
_VIEWS_CACHE_MAX = 2048
_views_lock = threading.Lock()


def _round_views(store, rnd: dict, judge_id: int) -> tuple[Any, tuple]:
    """(frozen solution, this judge's task views), cached per process.

    Rebuilding the solution from the round's snapshot on every save dominated the save path. The key holds
    everything the result depends on (database, round, a digest of the snapshot text, the tasks, the seed,
    the judge), so a changed input can never be served from the cache; the values are frozen dataclasses.
    """
    tasks = store.tasks(rnd["id"])
    snap = rnd.get("snapshot_json") or ""
    key = (str(store.path), rnd["id"], hashlib.sha256(snap.encode("utf-8", "surrogatepass")).hexdigest(),
           tuple((t["id"], t["position"], t["kind"], t["config_json"]) for t in tasks), rnd["seed"], judge_id)
    with _views_lock:
        hit = _VIEWS_CACHE.get(key)
    if hit is not None:
        return hit
    solution = store.round_solution(rnd["id"])
    views = tuple(T.build_view(t, solution, seed=rnd["seed"], judge_id=judge_id) for t in tasks)
    with _views_lock:
        if len(_VIEWS_CACHE) >= _VIEWS_CACHE_MAX:
            _VIEWS_CACHE.clear()
        _VIEWS_CACHE[key] = (solution, views)
    return solution, views


def load_context(token: str) -> JudgeContext:
    """Resolve a link token, raising ``_Refused`` for unknown/closed (same outcome) or revoked links."""
    store = get_store()
    inv = store.invitation_by_token(token)
    if inv is None:
        raise _Refused("unavailable")
    if inv["status"] != "active":
        raise _Refused("revoked")
    if inv["round_status"] != "open":
        raise _Refused("unavailable")
    rnd = store.get_round(inv["round_id"])
    solution, views = _round_views(store, rnd, inv["judge_id"])
    answers = {(a["task_id"], a["item"]): a for a in store.judge_answers(inv["judge_id"], rnd["id"])}
    return JudgeContext(token, inv, rnd, store.get_study(rnd["study_id"]), solution, views, answers)


def _deadline_passed(deadline: str | None) -> bool:
    if not deadline:
        return False
    text = str(deadline).strip()
    try:
        if len(text) == 10:   # a date: the deadline is the end of that day
            end = _dt.datetime.fromisoformat(text) + _dt.timedelta(days=1)
        else:
            end = _dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        return False
    if end.tzinfo is None:
        end = end.replace(tzinfo=_dt.timezone.utc)
    return _dt.datetime.now(_dt.timezone.utc) >= end


def _is_json_route() -> bool:
    return request.path.endswith("/save") or request.path.endswith("/state")


@bp.errorhandler(_Refused)
def _refused(err: _Refused):
    if err.kind == "revoked":
        if _is_json_route():
            return jsonify(ok=False, error=REVOKED_MESSAGE), 403
        return render_template("judge/revoked.html", message=REVOKED_MESSAGE), 403
    if _is_json_route():
        return jsonify(ok=False, error=UNAVAILABLE_MESSAGE), 404
    return render_template("judge/unavailable.html", message=UNAVAILABLE_MESSAGE), 404


def _json_error(message: str, status: int = 400):
    return jsonify(ok=False, error=message), status


# ---------------------------------------------------------------------------------------------- presenting
def _choice_parts(view, code: str, label: str) -> tuple[str, str]:
    """(main label, detail) for one radio option."""
    if view.kind == "label_match":
        if code == T.NONE_CODE:
            return T.NONE_LABEL, ""
        for fid, name, definition in view.factor_options:
            if fid == code:
                if name and definition:
                    return name, definition
                return (name or definition or label), ""
    return label, ""


def _units(ctx: JudgeContext, view, posted: dict | None, errors: dict | None) -> list[dict]:
    items = {it.id: it for it in ctx.solution.items}
    out = []
    for idx, u in enumerate(view.units):
        stored = ctx.answers.get((view.task_id, u.key))
        value = stored["value"] if stored else None
        comment = (stored["comment"] or "") if stored else ""
        saved = stored is not None
        if posted is not None and u.key in posted:
            pv, pc = posted[u.key]
            pv = pv if pv not in ("", None) else None
            if pv != value or (pc or "") != comment:
                value, comment, saved = pv, pc or "", False
        uid = f"u{idx}"
        choices = []
        for j, (code, label) in enumerate(u.choices):
            main, detail = _choice_parts(view, code, label)
            num, _, words = main.partition(" ")
            choices.append({"code": code, "label": main, "detail": detail, "id": f"{uid}-{j}",
                            "checked": value == code, "num": num if num.isdigit() else main,
                            "words": words if num.isdigit() else ""})
        out.append({"uid": uid, "key": u.key, "facet": u.facet, "item_id": u.item_id, "factor_id": u.factor_id,
                    "text": items[u.item_id].text if u.item_id in items else "",
                    "value": value, "comment": comment, "saved": saved,
                    "revision": stored["revision"] if stored else 0, "choices": choices,
                    "error": (errors or {}).get(u.key)})
    return out


def _factor(ctx: JudgeContext, fid: str | None):
    for f in ctx.solution.factors:
        if f.id == fid:
            return f
    return None


def _layout(ctx: JudgeContext, view, units: list[dict]) -> dict:
    """Group the units the way the page shows them."""
    kind = view.kind
    if kind == "open_sort":
        item_units = [u for u in units if u["facet"] != "pile"]
        piles = [u for u in units if u["facet"] == "pile"]
        names = {}
        for p in piles:
            n = p["key"].split(":", 1)[1]
            p["number"] = n
            p["count"] = sum(1 for u in item_units if u["value"] == n)
            if p["value"]:
                names[n] = p["value"]
        for u in item_units:       # a named pile shows its name in every statement's list of piles
            for c in u["choices"]:
                if c["code"] in names:
                    c["label"] = f"Pile {c['code']}: {names[c['code']]}"
        return {"items": item_units, "piles": piles}
    if kind in ("relevance", "essentiality"):
        for u in units:
            u["factor"] = _factor(ctx, u["factor_id"])
        return {"items": units}
    if kind == "definition_fit":
        groups: list[dict] = []
        for u in units:
            f = _factor(ctx, u["factor_id"])
            u["label"] = (f.definition or f.name) if f else u["factor_id"]
            if not groups or groups[-1]["item_id"] != u["item_id"]:
                groups.append({"item_id": u["item_id"], "text": u["text"], "uid": f"g{len(groups)}",
                               "units": []})
            groups[-1]["units"].append(u)
        return {"groups": groups}
    if kind == "naming":
        by_key = {u["key"]: u for u in units}
        items = {it.id: it.text for it in ctx.solution.items}
        groups = []
        for k, (fid, item_ids) in enumerate(view.groups, start=1):
            groups.append({"number": k, "uid": f"g{k}", "items": [items[i] for i in item_ids],
                           "name": by_key[f"{fid}|name"], "choice": by_key[f"{fid}|choice"],
                           "clarity": by_key[f"{fid}|clarity"]})
        return {"groups": groups}
    return {"items": units}


def _render_task(ctx: JudgeContext, n: int, *, posted: dict | None = None, errors: dict | None = None,
                 message: str | None = None, status: int = 200):
    view = ctx.view_at(n)
    units = _units(ctx, view, posted, errors)
    answered, required = ctx.progress()
    stale = request.args.get("stale", type=int) if request.method == "GET" else None
    items = {it.id: it.text for it in ctx.solution.items}
    error_list = [{"uid": u["uid"], "error": u["error"], "text": _unit_text(ctx, view, u["key"], items)}
                  for u in units if u["error"]]
    next_title = T.TASK_LABELS[ctx.views[n].kind].split(":")[0] if n < len(ctx.views) else None
    return render_template(
        "judge/task.html", ctx=ctx, view=view, n=n, n_tasks=len(ctx.views), layout=_layout(ctx, view, units),
        title=T.TASK_LABELS[view.kind].split(":")[0], lead=T.TASK_LABELS[view.kind].split(":", 1)[1].strip(),
        answered=answered, required=required, csrf=judge_csrf_token(ctx.token), message=message,
        stale=stale, readonly=ctx.submitted, errors=errors or {}, error_list=error_list, next_title=next_title,
        missing=len(ctx.missing(view))), status


def _resume_target(ctx: JudgeContext) -> str:
    for n, view in enumerate(ctx.views, start=1):
        if ctx.missing(view):
            return url_for(".task", token=ctx.token, n=n)
    return url_for(".review", token=ctx.token)


def _answer_text(view, key: str, value: str | None) -> str:
    if value in (None, ""):
        return ""
    unit = next((u for u in view.units if u.key == key), None)
    if unit is not None and unit.choices:
        for code, label in unit.choices:
            if code == value:
                return label
    return value


def _review_rows(ctx: JudgeContext) -> list[dict]:
    items = {it.id: it.text for it in ctx.solution.items}
    rows = []
    for n, view in enumerate(ctx.views, start=1):
        units = _units(ctx, view, None, None)
        uid_of = {u["key"]: u["uid"] for u in units}
        missing = ctx.missing(view)
        answers = []
        for u in view.units:
            a = ctx.answers.get((view.task_id, u.key))
            if a is None or (a["value"] in (None, "") and not a["comment"]):
                continue
            what = items.get(u.item_id, "")
            if u.kind == "definition_fit":
                f = _factor(ctx, u.factor_id)
                what = f"{what} / {f.definition or f.name if f else u.factor_id}"
            elif u.facet == "pile":
                what = f"Name of pile {u.key.split(':', 1)[1]}"
            elif u.kind == "naming":
                what = {"name": "Your name", "choice": "Best candidate", "clarity": "Clarity"}[u.facet] + \
                    f" (group {next(k for k, (fid, _) in enumerate(view.groups, 1) if fid == u.factor_id)})"
            answers.append({"what": what, "answer": _answer_text(view, u.key, a["value"]),
                            "comment": a["comment"]})
        unnamed = []
        if view.kind == "open_sort":
            vals = ctx.values()
            used = {vals.get((view.task_id, u.key)) for u in view.units if u.facet != "pile"}
            unnamed = [{"uid": uid_of[u.key], "text": f"Pile {u.key.split(':', 1)[1]}"} for u in view.units
                       if u.facet == "pile" and u.key.split(":", 1)[1] in used
                       and vals.get((view.task_id, u.key)) in (None, "")]
        rows.append({"n": n, "title": T.TASK_LABELS[view.kind].split(":")[0], "unnamed": unnamed,
                     "required": len(view.required_keys), "missing": [
                         {"key": k, "uid": uid_of[k], "text": _missing_text(ctx, view, k, items)} for k in missing],
                     "answers": answers})
    return rows


def _unit_text(ctx, view, key, items) -> str:
    """A short human name of one question (for the error summary at the top of a task page)."""
    unit = next(u for u in view.units if u.key == key)
    if unit.facet == "pile":
        return f"Name of pile {key.split(':', 1)[1]}"
    return _missing_text(ctx, view, key, items)


def _missing_text(ctx, view, key, items) -> str:
    unit = next(u for u in view.units if u.key == key)
    if unit.item_id:
        text = items.get(unit.item_id, unit.item_id)
        if unit.kind == "definition_fit":
            f = _factor(ctx, unit.factor_id)
            return f"{text} (against: {f.definition or f.name if f else unit.factor_id})"
        return text
    k = next((i for i, (fid, _) in enumerate(view.groups, 1) if fid == unit.factor_id), "?")
    return {"name": "your name", "choice": "best candidate", "clarity": "clarity"}.get(unit.facet, key) + \
        f" for group {k}"


def _common(ctx: JudgeContext) -> dict:
    answered, required = ctx.progress()
    return {"ctx": ctx, "answered": answered, "required": required, "csrf": judge_csrf_token(ctx.token),
            "task_titles": [T.TASK_LABELS[v.kind].split(":")[0] for v in ctx.views]}


# ---------------------------------------------------------------------------------------------- pages
@bp.get("/<token>")
def welcome(token: str):
    ctx = load_context(token)
    if ctx.submitted:
        return redirect(url_for(".review", token=token))
    return render_template("judge/welcome.html", resume=_resume_target(ctx) if ctx.consented else None,
                           message=None, **_common(ctx))


@bp.post("/<token>/consent")
def consent(token: str):
    ctx = load_context(token)
    if not _csrf_ok(token, request.form.get("csrf_token")):
        return render_template("judge/welcome.html", resume=None, **_common(ctx), message=(
            "The page's security check did not match this link; please press the button again.")), 400
    if ctx.submitted:
        return redirect(url_for(".review", token=token))
    get_store().record_consent(ctx.judge_id, ctx.round_id)
    return redirect(url_for(".task", token=token, n=1))


@bp.get("/<token>/task/<int:n>")
def task(token: str, n: int):
    ctx = load_context(token)
    if not ctx.consented:
        return redirect(url_for(".welcome", token=token))
    return _render_task(ctx, n)


def _posted(view, form) -> dict:
    return {u.key: (form.get("v__" + u.key), form.get("c__" + u.key, "")) for u in view.units}


def _int_or(text: Any, default: int) -> int:
    try:
        return min(max(int(str(text).strip()), 0), MAX_REVISION - 1)
    except (TypeError, ValueError):
        return default


@bp.post("/<token>/task/<int:n>")
def task_post(token: str, n: int):
    ctx = load_context(token)
    view = ctx.view_at(n)
    if not ctx.consented:
        return redirect(url_for(".welcome", token=token))
    form = request.form
    posted = _posted(view, form)
    if not _csrf_ok(token, form.get("csrf_token")):
        return _render_task(ctx, n, posted=posted, message=CSRF_MESSAGE, status=400)
    if ctx.submitted:
        return _render_task(ctx, n, message="Your answers were submitted and are locked; nothing was changed.",
                            status=403)
    rows, errors = [], {}
    for unit in view.units:
        raw_value, raw_comment = posted[unit.key]
        try:
            value, comment = T.check_answer(view, unit.key, raw_value, raw_comment)
        except FormInputError as exc:
            errors[unit.key] = str(exc)
            continue
        stored = ctx.answers.get((view.task_id, unit.key))
        if stored is None and value is None and not comment:
            continue
        if stored is not None and stored["value"] == value and (stored["comment"] or "") == comment:
            continue
        base = _int_or(form.get("rev__" + unit.key), 0)
        rows.append((view.task_id, unit.key, value, comment, base + 1, None))
    try:
        outcomes = get_store().save_answers(ctx.judge_id, ctx.round_id, rows) if rows else []
    except StorageUnavailableError:
        return _render_task(ctx, n, posted=posted, status=503, message=(
            "Not saved: the server cannot write just now. Your answers are still on this page; press the "
            "button again in a moment."))
    except StateError as exc:
        return _render_task(ctx, n, posted=posted, message=f"Nothing was saved: {exc}.", status=403)
    stale = sum(1 for o in outcomes if not o.accepted)
    if errors:
        fresh = load_context(token)
        keep = {k: v for k, v in posted.items() if k in errors}
        return _render_task(fresh, n, posted=keep, errors=errors, status=400, message=(
            "Some answers could not be saved; they are marked below. The others were saved."))
    go = form.get("go", "next")
    if stale:
        return redirect(url_for(".task", token=token, n=n, stale=stale))
    if go == "back" and n > 1:
        return redirect(url_for(".task", token=token, n=n - 1))
    if go == "stay":
        return redirect(url_for(".task", token=token, n=n))
    if go == "review" or n >= len(ctx.views):
        return redirect(url_for(".review", token=token))
    return redirect(url_for(".task", token=token, n=n + 1))


@bp.get("/<token>/review")
def review(token: str):
    ctx = load_context(token)
    if not ctx.consented and not ctx.submitted:
        return redirect(url_for(".welcome", token=token))
    return render_template("judge/review.html", rows=_review_rows(ctx), message=None, **_common(ctx))


@bp.post("/<token>/submit")
def submit(token: str):
    ctx = load_context(token)
    if not _csrf_ok(token, request.form.get("csrf_token")):
        return render_template("judge/review.html", rows=_review_rows(ctx), **_common(ctx), message=(
            "Not submitted: the page's security check did not match this link; please press the button "
            "again.")), 400
    if ctx.submitted:
        return redirect(url_for(".thanks", token=token))
    if not ctx.consented:
        return redirect(url_for(".welcome", token=token))
    try:
        get_store().submit(ctx.judge_id, ctx.round_id)
    except StateError as exc:
        return render_template("judge/review.html", rows=_review_rows(ctx), **_common(ctx),
                               message=f"Not submitted: {exc}."), 403
    return redirect(url_for(".thanks", token=token))


@bp.get("/<token>/thanks")
def thanks(token: str):
    ctx = load_context(token)
    if not ctx.submitted:
        return redirect(url_for(".review", token=token))
    return render_template("judge/thanks.html", **_common(ctx))


# ---------------------------------------------------------------------------------------------- JSON
def _body() -> dict:
    if request.is_json:
        data = request.get_json(silent=True)
        if data is None:
            raise FormInputError("the request body is not valid JSON")
        if not isinstance(data, dict):
            raise FormInputError("the request body must be a JSON object")
        try:   # JSON escapes can carry lone surrogates, which no database text can hold
            json.dumps(data, ensure_ascii=False).encode("utf-8")
        except (UnicodeEncodeError, ValueError, RecursionError):
            raise FormInputError("the request holds text that is not valid Unicode; nothing was saved") from None
        return data
    return request.form.to_dict()


def _parse_save(data: dict, from_form: bool) -> tuple[int, str, Any, Any, int, float | None]:
    missing = [f for f in ("task_id", "item", "value", "revision") if f not in data]
    if missing:
        raise FormInputError(f"missing field{'s' if len(missing) > 1 else ''}: {', '.join(missing)}")
    task_id, revision = data["task_id"], data["revision"]
    if from_form:
        task_id = _int_or(task_id, -1) if str(task_id).strip().isdigit() else task_id
        revision = int(revision) if str(revision).strip().isdigit() else revision
    if not isinstance(task_id, int) or isinstance(task_id, bool) or abs(task_id) > MAX_REVISION:
        raise FormInputError("task_id must be a whole number")
    if not isinstance(revision, int) or isinstance(revision, bool) or not 1 <= revision <= MAX_REVISION:
        raise FormInputError(f"revision must be a whole number from 1 to {MAX_REVISION}")
    item = data["item"]
    if not isinstance(item, str) or not item:
        raise FormInputError("item must be the text key of a question")
    seconds = data.get("seconds")
    if seconds in (None, ""):
        seconds = None
    else:
        try:
            seconds = float(seconds)
        except (TypeError, ValueError):
            raise FormInputError("seconds must be a number") from None
        if isinstance(data.get("seconds"), bool) or not math.isfinite(seconds) or seconds < 0:
            raise FormInputError("seconds must be a number of at least 0")
        seconds = min(seconds, MAX_SECONDS)
    return task_id, item, data["value"], data.get("comment"), revision, seconds


@bp.post("/<token>/save")
def save(token: str):
    ctx = load_context(token)
    try:
        data = _body()
    except FormInputError as exc:
        return _json_error(str(exc))
    if not _csrf_ok(token, request.headers.get("X-CSRF-Token") or data.get("csrf_token")):
        return _json_error("The page's security check did not match this link; reload the page. "
                           "Nothing was saved.")
    if ctx.submitted:
        return _json_error("Your answers were submitted and are locked; nothing was changed.", 403)
    if not ctx.consented:
        return _json_error("Please read and accept the consent text first; nothing was saved.", 403)
    try:
        task_id, item, value, comment, revision, seconds = _parse_save(data, not request.is_json)
        view = next((v for v in ctx.views if v.task_id == task_id), None)
        if view is None:
            raise FormInputError(f"task {task_id} is not part of this round")
        if comment is None:   # not sent: keep the stored comment rather than wiping it
            stored = ctx.answers.get((task_id, item))
            comment = stored["comment"] if stored else ""
        value, comment = T.check_answer(view, item, value, comment)
        store = get_store()
        outcome = store.save_answer(ctx.judge_id, ctx.round_id, task_id, item, value, comment,
                                    revision=revision, seconds=seconds)
    except StorageUnavailableError:   # nothing committed: 503 so the page keeps its copy and retries
        return _json_error(NOT_SAVED_RETRYING, 503)
    except StateError as exc:
        return _json_error(f"{exc}; nothing was changed.", 403)
    except (FormInputError, NotFoundError) as exc:
        return _json_error(str(exc))
    except LabelstudyError as exc:
        return _json_error(str(exc))
    values = ctx.values()
    values[(task_id, item)] = outcome.value     # the stored value after this save (no second full load)
    answered, required = T.progress(ctx.views, values)
    extra = {} if outcome.accepted else {"error": (
        "This answer was changed on another device or tab in the meantime; the newer answer is shown and "
        "nothing was overwritten.")}
    return jsonify(ok=outcome.accepted, status=outcome.status, task_id=task_id, item=item, **extra,
                   revision=outcome.revision, value=outcome.value, comment=outcome.comment,
                   saved_at=outcome.answered_at, progress={"answered": answered, "required": required}), \
        (200 if outcome.accepted else 409)


@bp.get("/<token>/state")
def state(token: str):
    ctx = load_context(token)
    answered, required = ctx.progress()
    answers = [{"task_id": a["task_id"], "item": a["item"], "value": a["value"], "comment": a["comment"] or "",
                "revision": a["revision"], "saved_at": a["answered_at"]} for a in ctx.answers.values()]
    return jsonify(ok=True, submitted=ctx.submitted, consented=ctx.consented, answers=answers,
                   progress={"answered": answered, "required": required})
