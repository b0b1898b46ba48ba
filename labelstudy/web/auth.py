"""Researcher login: one password per project (salted hash in the store), throttled after failures."""

from __future__ import annotations

import time
from functools import wraps

from flask import (Blueprint, current_app, flash, redirect, render_template, request, session, url_for)

from labelstudy.web import get_project, get_store

bp = Blueprint("auth", __name__, url_prefix="/r")


def login_required(view):
    """Send anyone not logged in as the researcher to the login page (401 for JSON callers)."""
    @wraps(view)
    def wrapped(*args, **kwargs):
        if not session.get("researcher"):
            if request.accept_mimetypes.best == "application/json":
                return {"ok": False, "error": "log in first"}, 401
            return redirect(url_for("auth.login", next=request.full_path if request.method == "GET" else None))
        return view(*args, **kwargs)
    return wrapped


def _throttled(remote: str) -> int:
    """Seconds to wait before another attempt is allowed (0 = allowed)."""
    cfg = current_app.config
    window = cfg["LOGIN_WINDOW_SECONDS"]
    failures = get_store().login_failures_since(time.time() - window, remote)
    return window if failures >= cfg["LOGIN_MAX_FAILURES"] else 0


@bp.route("/login", methods=["GET", "POST"])
def login():
    remote = request.remote_addr or ""
    if request.method == "POST":
        wait = _throttled(remote)
        if wait:
            return render_template("auth/login.html", error=(
                f"Too many failed attempts. Try again in {wait // 60} minutes.")), 429
        if get_project().check_password(request.form.get("password", "")):
            get_store().clear_login_failures(remote)
            session.clear()
            session["researcher"] = True
            session.permanent = False
            target = request.args.get("next") or ""
            if not target.startswith("/r/") or target.startswith("//"):
                target = url_for("researcher.index")
            return redirect(target)
        get_store().record_login_failure(remote, time.time())
        return render_template("auth/login.html", error="That password is not right."), 401
    return render_template("auth/login.html", error=None)


@bp.route("/logout", methods=["POST"])
def logout():
    session.clear()
    flash("You are logged out.", "info")
    return redirect(url_for("auth.login"))
