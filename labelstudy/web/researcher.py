"""Researcher pages (``/r``): studies, factor and item wording, composing rounds, the round dashboard,
judges' links and QR codes, the printable invitation sheet and panel-size planning.

Every view needs the researcher login; every POST carries Flask-WTF's CSRF token (checked globally by
``CSRFProtect``). Bad input comes back on the same page with a message naming what is wrong (status 400;
409 for an edit made stale by another tab) and nothing half-written: every write is one store transaction.
"""

from __future__ import annotations

import json
import threading
from typing import Any

from flask import (Blueprint, Response, abort, current_app, flash, jsonify, redirect, render_template,
                   request, url_for)

from labelstudy.errors import (FormInputError, LabelstudyError, NotFoundError, SolutionImportError,
                               StaleRevisionError, StateError, StorageUnavailableError, StoreError)
from labelstudy.links import judge_url, qr_svg, status_words
from labelstudy.tasks import DEFAULT_CONFIG, SHOW_CHOICES, TASK_LABELS, build_view, progress
from labelstudy.web import get_store
from labelstudy.web.auth import login_required
from labelstudy.web.forms import (TASK_ORDER, missing_definitions, parse_judge_lines, parse_panel_size,
                                  parse_round_form, round_form_defaults, round_form_from)

__all__ = ["bp", "plan_messages", "results_endpoint_url"]

bp = Blueprint("researcher", __name__, url_prefix="/r")

PLAN_SIMULATIONS = 200
_plan_cache: dict[tuple, tuple[str, ...]] = {}
_plan_lock = threading.Lock()
_PLAN_CACHE_MAX = 256


@bp.before_request
@login_required
def _require_login():
    """Every researcher page needs the login (the decorator returns a redirect, or None to go on)."""
    return None


# ---------------------------------------------------------------------------------------------- helpers
def results_endpoint_url(rid: int) -> str | None:
    """URL of the round's results page when the results blueprint is installed, else None."""
    if "results.round_results" in current_app.view_functions:
        return url_for("results.round_results", rid=rid)
    return None


@bp.context_processor
def _template_helpers() -> dict[str, Any]:
    return {"results_url": results_endpoint_url, "task_labels": TASK_LABELS}


def _base_url() -> str:
    return (current_app.config.get("BASE_URL") or request.host_url).rstrip("/")


def _study_or_404(sid: int) -> dict:
    try:
        return get_store().get_study(sid)
    except NotFoundError:
        abort(404)


def _round_or_404(rid: int) -> dict:
    try:
        return get_store().get_round(rid)
    except NotFoundError:
        abort(404)


def _plan_panel():
    from labelstudy.agreement import plan_panel   # imported on first use: the statistics stack is heavy
    return plan_panel


def plan_messages(n_judges: int, n_items: int, n_factors: int, seed: int) -> tuple[str, ...]:
    """``plan_panel(...).messages``, cached in-process by arguments (the planner simulates).

    Planner refusals (our own errors) come back as a one-sentence message instead of raising.
    """
    key = (n_judges, n_items, n_factors, seed)
    with _plan_lock:
        if key in _plan_cache:
            return _plan_cache[key]
    planner = _plan_panel()
    try:
        plan = planner(n_judges, n_items, n_factors, n_sim=PLAN_SIMULATIONS, seed=seed)
        messages = tuple(str(m) for m in plan.messages)
    except LabelstudyError as exc:
        messages = (f"No plan for {n_judges} judges: {exc}",)
    with _plan_lock:
        if len(_plan_cache) >= _PLAN_CACHE_MAX:
            _plan_cache.clear()
        _plan_cache[key] = messages
    return messages


def _flag_words(codes, table: dict[str, str], names: dict[str, str] | None = None) -> list[str]:
    out = []
    for code in codes:
        base, _, other = code.partition(":")
        words = table.get(base, code)
        if other:
            words = f"{words} (with {other}{' ' + names[other] if names and other in names else ''})"
        out.append(words)
    return out


# ---------------------------------------------------------------------------------------------- studies
@bp.get("/")
def index():
    store = get_store()
    studies = store.list_studies()
    rounds: dict[int, list[dict]] = {}
    for r in store.list_rounds():
        rounds.setdefault(r["study_id"], []).append(r)
    return render_template("researcher/index.html", studies=studies, rounds=rounds)


@bp.route("/studies/new", methods=["GET", "POST"])
def new_study():
    if request.method == "GET":
        return render_template("researcher/new_study.html", title="", error=None)
    from labelstudy.solution import read_solution_bytes

    title = (request.form.get("title") or "").strip()
    upload = request.files.get("solution")

    def refuse(message: str):
        return render_template("researcher/new_study.html", title=title, error=message), 400

    if len(title) > 200:
        return refuse("The title is longer than 200 characters.")
    if upload is None or not upload.filename:
        return refuse("Choose a solution file to upload (.xlsx, .csv, .tsv or .json).")
    data = upload.read()
    try:
        solution = read_solution_bytes(data, upload.filename, require_text=True)
    except SolutionImportError as exc:
        return refuse(str(exc))
    sid = get_store().create_study(title or solution.source, solution)
    flash("The solution was imported. Check the diagnosis below, then write or revise the factor "
          "definitions before composing a round.", "info")
    return redirect(url_for("researcher.study", sid=sid))


def _study_page(sid: int, *, conflict: dict | None = None, error: dict | None = None, status: int = 200):
    from labelstudy.solution import FACTOR_FLAGS, ITEM_FLAGS, diagnose

    store = get_store()
    study = _study_or_404(sid)
    solution = store.get_solution(sid)
    diag = diagnose(solution)
    names = {f.id: f.name for f in solution.factors}
    factor_ids = [f.id for f in solution.factors]
    loads = {it.id: dict(it.loadings) for it in solution.items}
    drows = {r.item: r for r in diag.items.itertuples(index=False)}
    items = []
    for row in store.items(sid):
        d = drows[row["item_id"]]
        items.append({**row, "loadings": [loads[row["item_id"]][f] for f in factor_ids],
                      "primary": d.primary, "primary_loading": d.primary_loading, "secondary": d.secondary,
                      "secondary_loading": d.secondary_loading,
                      "flags": _flag_words(d.flags, ITEM_FLAGS)})
    fdiag = {r.factor: r for r in diag.factors.itertuples(index=False)}
    factors = [{**row, "salient_items": int(fdiag[row["factor_id"]].salient_items),
                "flags": _flag_words(fdiag[row["factor_id"]].flags, FACTOR_FLAGS, names)}
               for row in store.factors(sid)]
    rounds = store.list_rounds(sid)
    notes = list(json.loads(study["notes_json"] or "[]")) + list(diag.notes)
    return render_template(
        "researcher/study.html", study=study, items=items, factors=factors, factor_ids=factor_ids,
        rounds=rounds, notes=notes, thresholds=diag.thresholds, meta=dict(solution.meta),
        live_rounds=[r for r in rounds if r["status"] != "draft"],
        undefined=[f["name"] for f in factors if not f["definition"].strip()],
        conflict=conflict, error=error), status


@bp.get("/studies/<int:sid>")
def study(sid: int):
    return _study_page(sid)[0]


def _expected_version() -> int:
    try:
        return int(request.form.get("version", ""))
    except ValueError:
        return -1   # a missing or damaged version can only be stale


@bp.post("/studies/<int:sid>/factors/<path:fid>")
def edit_factor(sid: int, fid: str):
    store = get_store()
    _study_or_404(sid)
    name = (request.form.get("name") or "").strip()
    definition = (request.form.get("definition") or "").replace("\r\n", "\n").strip()
    current = next((f for f in store.factors(sid) if f["factor_id"] == fid), None)
    if current is None:
        abort(404)
    yours = {"name": name, "definition": definition}
    if len(name) > 120 or len(definition) > 5000:
        return _study_page(sid, error={"kind": "factor", "id": fid, "yours": yours, "message":
                                       f"Factor {fid}: the name may have at most 120 characters and the "
                                       "definition at most 5000."}, status=400)
    return _save_edit(sid, "factor", fid, current, yours, lambda version: store.update_factor(
        sid, fid, name=name, definition=definition, expected_version=version))


def _save_edit(sid: int, kind: str, key: str, current: dict, yours: dict, save):
    """Run one versioned edit; a stale version re-renders the study page with both texts (409), a refused
    value with its message (400); storage failures go to the app's 503 page. Nothing half-written."""
    try:
        save(_expected_version())
    except StaleRevisionError:
        return _study_page(sid, conflict={"kind": kind, "id": key, "current": current, "yours": yours},
                           status=409)
    except StorageUnavailableError:   # nothing written: the app's 503 page says so
        raise
    except StoreError as exc:
        return _study_page(sid, error={"kind": kind, "id": key, "yours": yours, "message": str(exc)},
                           status=400)
    flash(f"{kind.capitalize()} {key} saved.", "info")
    return redirect(url_for("researcher.study", sid=sid) + f"#{kind}-{key}")


@bp.post("/studies/<int:sid>/items/<path:iid>")
def edit_item(sid: int, iid: str):
    store = get_store()
    _study_or_404(sid)
    text = (request.form.get("text") or "").replace("\r\n", "\n").strip()
    current = next((i for i in store.items(sid) if i["item_id"] == iid), None)
    if current is None:
        abort(404)
    yours = {"text": text}
    if len(text) > 2000:
        return _study_page(sid, error={"kind": "item", "id": iid, "yours": yours,
                                       "message": f"Item {iid}: the text may have at most 2000 characters."},
                           status=400)
    return _save_edit(sid, "item", iid, current, yours,
                      lambda version: store.update_item(sid, iid, text=text, expected_version=version))


# ---------------------------------------------------------------------------------------------- rounds
@bp.route("/studies/<int:sid>/rounds/new", methods=["GET", "POST"])
def new_round(sid: int):
    store = get_store()
    study_row = _study_or_404(sid)
    factors = store.factors(sid)
    rounds = store.list_rounds(sid)
    number = len(rounds) + 1
    if request.method == "GET":
        previous = rounds[-1] if rounds and request.args.get("fresh") != "1" else None
        values = (round_form_from(previous, store.tasks(previous["id"]), factors, number) if previous
                  else round_form_defaults(factors, number))
        error, status = None, 200
    else:
        values = {k: v for k, v in request.form.items() if k != "csrf_token"}
        try:
            plan = parse_round_form(request.form, factors)
        except FormInputError as exc:
            error, status = str(exc), 400
        else:
            rid = store.create_round(sid, tasks=list(plan.tasks), title=plan.title,
                                     instructions=plan.instructions, consent=plan.consent,
                                     deadline=plan.deadline)
            flash("The round was created as a draft. Add judges, then open it.", "info")
            return redirect(url_for("researcher.round_page", rid=rid))
    return render_template("researcher/new_round.html", study=study_row, factors=factors, values=values,
                           error=error, previous_round=rounds[-1]["number"] if rounds else None, task_order=TASK_ORDER, show_choices=SHOW_CHOICES,
                           defaults=DEFAULT_CONFIG,
                           undefined=[f["name"] for f in factors if not f["definition"].strip()]), status


def _judge_rows(rnd: dict, tasks: list[dict]) -> list[dict]:
    store = get_store()
    solution = store.round_solution(rnd["id"])
    base = _base_url()
    out = []
    for inv in store.invitations(rnd["id"]):
        views = [build_view(t, solution, seed=rnd["seed"], judge_id=inv["judge_id"]) for t in tasks]
        answers = {(a["task_id"], a["item"]): a["value"] for a in store.judge_answers(inv["judge_id"], rnd["id"])}
        answered, required = progress(views, answers)
        out.append({**inv, "answered": answered, "required": required,
                    "status_text": status_words({**inv, "n_answered": answered}, required),
                    "link": judge_url(base, inv["token"]),
                    "last_activity": (inv["last_activity_at"] or "")[:16].replace("T", " ")})
    return out


def _round_page(rid: int, *, error: str | None = None, judges_text: str = "", status: int = 200):
    store = get_store()
    rnd = _round_or_404(rid)
    study_row = store.get_study(rnd["study_id"])
    tasks = store.tasks(rid)
    judges = _judge_rows(rnd, tasks)
    active = sum(1 for j in judges if j["status"] == "active")
    solution = store.round_solution(rid)
    if active >= 2:
        plan = plan_messages(active, len(solution.items), len(solution.factors), rnd["seed"])
    else:
        plan = ("With fewer than two judges no agreement can be estimated; add judges to see what this "
                "panel can and cannot establish.",)
    earlier = [r for r in store.list_rounds(rnd["study_id"]) if r["number"] < rnd["number"]]
    return render_template("researcher/round.html", rnd=rnd, study=study_row, tasks=tasks, judges=judges,
                           earlier_rounds=earlier,
                           n_active=active, plan=plan, error=error, judges_text=judges_text,
                           n_items=len(solution.items), n_factors=len(solution.factors)), status


@bp.get("/rounds/<int:rid>")
def round_page(rid: int):
    return _round_page(rid)[0]


@bp.post("/rounds/<int:rid>/judges")
def add_judges(rid: int):
    store = get_store()
    _round_or_404(rid)
    text = request.form.get("judges", "")
    existing = [inv["display_name"] for inv in store.invitations(rid)]
    try:
        rows = parse_judge_lines(text, existing)
        added = store.add_judges(rid, [(r.display_name, r.email, r.expertise) for r in rows])
    except StorageUnavailableError:   # nothing written: the app's 503 page says so
        raise
    except (FormInputError, StoreError) as exc:
        return _round_page(rid, error=f"No judges were added: {exc}.", judges_text=text, status=400)
    flash(f"{len(added)} judge{'s' if len(added) != 1 else ''} added; each has a personal link below.", "info")
    return redirect(url_for("researcher.round_page", rid=rid) + "#judges")


@bp.post("/rounds/<int:rid>/judges/carry-over")
def carry_over(rid: int):
    """Invite the panel of an earlier round of the same study to this round (new links for everyone)."""
    store = get_store()
    rnd = _round_or_404(rid)
    earlier = {r["id"]: r for r in store.list_rounds(rnd["study_id"]) if r["number"] < rnd["number"]}
    try:
        source = int(request.form.get("from_round", ""))
    except ValueError:
        source = None
    if source not in earlier:   # the form offers only earlier rounds of this study; refuse anything else
        return _round_page(rid, error="No judges were invited. Choose the earlier round of this study whose "
                                      "judges should be invited.", status=400)
    try:
        added = store.carry_over_panel(rid, from_round_id=source)
    except StorageUnavailableError:   # nothing written: the app's 503 page says so
        raise
    except StoreError as exc:
        return _round_page(rid, error=f"No judges were invited: {exc}.", status=400)
    src = earlier[source]
    name = f"round {src['number']}"
    if src["title"] and src["title"].strip().casefold() != name:
        name += f" ({src['title'].strip()})"
    if added == 0:
        flash(f"Nobody was invited: every active judge of {name} is already on this round's panel.", "info")
    else:
        flash(f"{added} judge{'s' if added != 1 else ''} from {name} invited with new links.", "info")
    return redirect(url_for("researcher.round_page", rid=rid) + "#judges")


_TRANSITIONS = {
    "open": ("draft", "Only a draft round can be opened; this round is {status}."
                      "{hint}"),
    "close": ("open", "Only an open round can be closed; this round is {status}."),
    "reopen": ("closed", "Only a closed round can be reopened; this round is {status}."),
}


@bp.post("/rounds/<int:rid>/<any(open, close, reopen):action>")
def change_status(rid: int, action: str):
    store = get_store()
    rnd = _round_or_404(rid)
    needed, message = _TRANSITIONS[action]
    if rnd["status"] != needed:
        hint = " A closed round can be reopened." if action == "open" and rnd["status"] == "closed" else ""
        return _round_page(rid, error=message.format(status=rnd["status"], hint=hint), status=400)
    if action == "open":
        solution = store.get_solution(rnd["study_id"])
        needing, empty = missing_definitions(store.tasks(rid), solution.factors)
        if needing:
            return _round_page(rid, status=400, error=(
                f"The round was not opened: {' and '.join(needing)} show factor definitions to judges, but "
                f"{'this factor has' if len(empty) == 1 else 'these factors have'} no definition yet: "
                f"{', '.join(empty)}. Write the definitions on the study page first."))
    try:
        {"open": store.open_round, "close": store.close_round, "reopen": store.reopen_round}[action](rid)
    except StateError as exc:
        return _round_page(rid, error=str(exc), status=400)
    words = {"open": "opened: judges' links now work. Later edits to factors and items affect only later "
                     "rounds", "close": "closed: judges can no longer change answers",
             "reopen": "reopened: judges may revise and submit again"}
    flash(f"The round was {words[action]}.", "info")
    return redirect(url_for("researcher.round_page", rid=rid))


@bp.post("/rounds/<int:rid>/judges/<int:jid>/revoke")
def revoke(rid: int, jid: int):
    store = get_store()
    _round_or_404(rid)
    try:
        inv = store.invitation_for(jid, rid)
    except NotFoundError:
        abort(404)
    if inv["status"] == "revoked":
        return _round_page(rid, status=400, error=f"The link of {inv['display_name']} was already withdrawn.")
    try:
        store.revoke(jid, rid)
    except StateError as exc:
        return _round_page(rid, error=str(exc), status=400)
    flash(f"The link of {inv['display_name']} was withdrawn; it no longer opens the form. Answers already "
          "saved are kept.", "info")
    return redirect(url_for("researcher.round_page", rid=rid) + "#judges")


@bp.get("/rounds/<int:rid>/invitations")
def invitations(rid: int):
    store = get_store()
    rnd = _round_or_404(rid)
    base = _base_url()
    cards = [{**inv, "link": judge_url(base, inv["token"]), "qr": qr_svg(judge_url(base, inv["token"]))}
             for inv in store.invitations(rid) if inv["status"] == "active"]
    return render_template("researcher/invitations.html", rnd=rnd, study=store.get_study(rnd["study_id"]),
                           cards=cards)


@bp.get("/rounds/<int:rid>/judges/<int:jid>/qr.svg")
def judge_qr(rid: int, jid: int):
    _round_or_404(rid)
    try:
        inv = get_store().invitation_for(jid, rid)
    except NotFoundError:
        abort(404)
    return Response(qr_svg(judge_url(_base_url(), inv["token"])), mimetype="image/svg+xml")


@bp.get("/rounds/<int:rid>/plan")
def plan(rid: int):
    store = get_store()
    rnd = _round_or_404(rid)
    solution = store.round_solution(rid)
    active = sum(1 for inv in store.invitations(rid) if inv["status"] == "active")
    raw = request.args.get("judges")
    error, messages, n = None, (), None
    if raw is None or raw == "":
        n = max(active, 2)
    else:
        try:
            n = parse_panel_size(raw)
        except FormInputError as exc:
            error = f"{exc}."
    if n is not None:
        messages = plan_messages(n, len(solution.items), len(solution.factors), rnd["seed"])
    if request.args.get("format") == "json":   # the round page updates its plan while judges are typed in
        return jsonify(ok=error is None, judges=n if error is None else None, messages=list(messages),
                       error=error), (400 if error else 200)
    return render_template("researcher/plan.html", rnd=rnd, study=store.get_study(rnd["study_id"]),
                           n=n if n is not None else raw, n_active=active, messages=messages, error=error,
                           n_items=len(solution.items), n_factors=len(solution.factors)), (400 if error else 200)
