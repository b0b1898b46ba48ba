"""The thin web layer: an app factory, a researcher blueprint and a judge blueprint.

Views only parse requests, call the store, :mod:`labelstudy.tasks`, :mod:`labelstudy.solution` and
:mod:`labelstudy.agreement`, and render templates. No SQL here.
"""

from __future__ import annotations

import os
import re
from pathlib import Path
from typing import Any

from flask import Flask, g, jsonify, render_template, request
from flask_wtf.csrf import CSRFError, CSRFProtect

from labelstudy.errors import LabelstudyError, StorageUnavailableError
from labelstudy.project import Project, open_project

csrf = CSRFProtect()

CSP = ("default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
       "font-src 'self'; connect-src 'self'; form-action 'self'; frame-ancestors 'none'; "
       "base-uri 'none'; object-src 'none'")
MAX_UPLOAD = 5 * 1024 * 1024
NOT_SAVED_RETRYING = "Not saved: the server cannot write just now; retrying"


def template_folder() -> Path:
    """Templates built into the wheel (``labelstudy/templates``) or, in a source checkout, ``templates/``."""
    here = Path(__file__).resolve().parent.parent
    packaged = here / "templates"
    if packaged.is_dir():
        return packaged
    checkout = here.parent / "templates"
    if checkout.is_dir():
        return checkout
    raise LabelstudyError("labelstudy's templates are missing from this installation")


def create_app(project_dir: str | os.PathLike | None = None, test_config: dict[str, Any] | None = None) -> Flask:
    """Build the WSGI app for one project folder (or ``test_config['PROJECT_DIR']``)."""
    static = Path(__file__).resolve().parent.parent / "static"
    app = Flask("labelstudy", template_folder=str(template_folder()), static_folder=str(static),
                static_url_path="/static")
    config = dict(test_config or {})
    project_dir = project_dir or config.get("PROJECT_DIR") or os.environ.get("LABELSTUDY_PROJECT")
    if not project_dir:
        raise LabelstudyError("no project folder given (labelstudy serve PROJECT_DIR)")
    project = open_project(project_dir)
    app.config.update(
        PROJECT_DIR=str(project.path),
        SECRET_KEY=project.secret_key(),
        MAX_CONTENT_LENGTH=MAX_UPLOAD,
        SESSION_COOKIE_HTTPONLY=True,
        SESSION_COOKIE_SAMESITE="Lax",
        SESSION_COOKIE_SECURE=False,          # set per request below when served over https
        WTF_CSRF_TIME_LIMIT=12 * 3600,
        WTF_CSRF_SSL_STRICT=False,
        BASE_URL=None,                        # public base for judge links; default: the request's host
        LOGIN_MAX_FAILURES=5,
        LOGIN_WINDOW_SECONDS=15 * 60,
    )
    app.config.update(config)
    app.extensions["labelstudy_project"] = project
    app.extensions["labelstudy_store"] = project.store()
    csrf.init_app(app)

    from labelstudy.web import auth, judge, researcher, results
    app.register_blueprint(auth.bp)
    app.register_blueprint(researcher.bp)
    app.register_blueprint(results.bp)
    app.register_blueprint(judge.bp)
    csrf.exempt(judge.bp)   # judge forms carry a link-bound token, checked by the judge blueprint itself

    @app.before_request
    def _secure_cookie_over_https():
        app.config["SESSION_COOKIE_SECURE"] = request.is_secure

    @app.after_request
    def _headers(resp):
        resp.headers.setdefault("Content-Security-Policy", CSP)
        resp.headers["X-Content-Type-Options"] = "nosniff"
        resp.headers["X-Frame-Options"] = "DENY"
        resp.headers["Referrer-Policy"] = "no-referrer"
        resp.headers.setdefault("Cache-Control", "no-store")
        return resp

    def _wants_json() -> bool:
        return request.is_json or request.accept_mimetypes.best == "application/json" or \
            request.path.startswith("/j/") and request.path.endswith("/save")

    @app.errorhandler(CSRFError)
    def _csrf(err):
        if _wants_json():
            return jsonify(ok=False, error="The form expired; reload the page to continue."), 400
        return render_template("errors/message.html", title="The form expired",
                               message="This form was open too long or in another session. Go back, "
                                       "reload the page and send it again."), 400

    @app.errorhandler(LabelstudyError)
    def _domain(err):
        if _wants_json():
            return jsonify(ok=False, error=str(err)), 400
        return render_template("errors/message.html", title="That did not work", message=str(err)), 400

    def _log_exception(exc_info):
        # Flask's default names the request path, and a judge's path holds the link token (a credential).
        path = re.sub(r"^/j/[^/]+", "/j/<link>", request.path)
        app.logger.error("Exception on %s [%s]", path, request.method, exc_info=exc_info)
    app.log_exception = _log_exception

    @app.errorhandler(StorageUnavailableError)
    def _storage(err):
        # Disk full, read-only or locked database: nothing was committed, so nothing is acknowledged.
        # 503 tells the judge's script to keep its local copy and retry.
        if _wants_json():
            return jsonify(ok=False, error=NOT_SAVED_RETRYING), 503, {"Retry-After": "5"}
        return render_template("errors/message.html", title="Not saved", message=(
            "The server cannot write to the project database just now (the disk may be full or the file "
            "read-only), so nothing was changed. Go back and try again in a moment; if it keeps happening, "
            "free disk space or check the file's permissions.")), 503, {"Retry-After": "5"}

    @app.errorhandler(404)
    def _404(err):
        if _wants_json():
            return jsonify(ok=False, error="not found"), 404
        return render_template("errors/message.html", title="Page not found",
                               message="There is nothing at this address."), 404

    @app.errorhandler(405)
    def _405(err):
        return render_template("errors/message.html", title="Not allowed",
                               message="This address does not accept that kind of request."), 405

    @app.errorhandler(413)
    def _413(err):
        msg = f"The upload is larger than the limit of {MAX_UPLOAD // (1024 * 1024)} MB."
        if _wants_json():
            return jsonify(ok=False, error=msg), 413
        return render_template("errors/message.html", title="File too large", message=msg), 413

    @app.errorhandler(500)
    def _500(err):
        if _wants_json():
            return jsonify(ok=False, error="Something went wrong on the server; reload the page to see "
                                           "what was saved."), 500
        return render_template("errors/message.html", title="Something went wrong",
                               message="The server could not finish this request. Reload the page to see "
                                       "what was saved, then try again."), 500

    return app


def get_store():
    from flask import current_app
    return current_app.extensions["labelstudy_store"]


def get_project() -> Project:
    from flask import current_app
    return current_app.extensions["labelstudy_project"]
