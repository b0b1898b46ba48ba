"""Results pages (``/r/rounds/<rid>/results``) and downloads (``/r/rounds/<rid>/export/<name>``).

Both need the researcher login. The page and every download come from the same cached
:class:`~labelstudy.results.RoundResults` (scored again only when the answers or the rules change). When
the study has an earlier round with answers, the page and the report compare this round with it.
"""

from __future__ import annotations

from flask import Blueprint, Response, abort, current_app, render_template, url_for

from labelstudy.errors import NotFoundError
from labelstudy.results import EXPORTS, compare_rounds, earlier_round, export_bytes, load_rules, score_round
from labelstudy.results.report import report_context
from labelstudy.web import get_project, get_store
from labelstudy.web.auth import login_required

__all__ = ["bp"]

bp = Blueprint("results", __name__, url_prefix="/r")

# The downloaded report is a standalone file with its stylesheet inline and images as data: URIs.
REPORT_CSP = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; form-action 'none'"


def _scored(rid: int):
    store = get_store()
    try:
        rnd = store.get_round(rid)
    except NotFoundError:
        abort(404)
    rules = load_rules(get_project().path)
    results = score_round(store, rid, rules=rules)
    comparison = None
    prev = earlier_round(store, rid)
    if prev is not None:
        comparison = compare_rounds(score_round(store, prev, rules=rules), results)
    return rnd, results, comparison


@bp.get("/rounds/<int:rid>/results")
@login_required
def round_results(rid: int):
    rnd, results, comparison = _scored(rid)
    views = current_app.view_functions
    back = url_for("researcher.round_page", rid=rid) if "researcher.round_page" in views else None
    study_url = (url_for("researcher.study", sid=rnd["study_id"]) if "researcher.study" in views
                 else url_for("researcher.index"))
    return render_template("results/round.html", exports=list(EXPORTS), back_url=back, study_url=study_url,
                           **report_context(results, comparison=comparison))


@bp.get("/rounds/<int:rid>/export/<name>")
@login_required
def export(rid: int, name: str):
    if name not in EXPORTS:
        abort(404)
    rnd, results, comparison = _scored(rid)
    body = export_bytes(results, name, comparison=comparison)
    filename = f"study{rnd['study_id']}-round{rnd['number']}-{name}"
    resp = Response(body, content_type=EXPORTS[name])
    resp.headers["Content-Disposition"] = f'attachment; filename="{filename}"'
    if name == "report.html":
        resp.headers["Content-Security-Policy"] = REPORT_CSP
    return resp
