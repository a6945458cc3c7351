"""The shared HTTP edge: security headers on every answer, the health probe, access helpers."""

from __future__ import annotations

import re
from functools import wraps

from flask import Blueprint, abort, current_app, redirect, request, session, url_for

from .ratelimit import FailureLimiter
from .registry import LiveSession, Registry

bp = Blueprint("web", __name__)
SECRET_PATTERN = re.compile(r"^[A-Za-z0-9_-]{16,64}$")


def registry() -> Registry:
    return current_app.extensions["ebbtide"]


def live_session() -> LiveSession:
    reg = registry()
    if reg.current_id is None:
        abort(503)
    return reg.current


def limiter(name: str) -> FailureLimiter:
    limiters = current_app.extensions.setdefault("ebbtide_limiters", {})
    return limiters.setdefault(name, FailureLimiter())


@bp.after_app_request
def remember_language(response):
    """A ``?lang=`` choice sticks for later pages (security headers: ``serving.GuardedWSGI``)."""
    lang = request.args.get("lang")
    if lang and registry().current_id and lang in registry().current.study.session.languages:
        response.set_cookie("lang", lang, samesite="Strict", max_age=30 * 86400)
    return response


@bp.get("/healthz")
def healthz():
    """Liveness probe for tests and scripts."""
    return {"ok": True, "session_id": registry().current_id}



def console_required(view):
    @wraps(view)
    def inner(*args, **kwargs):
        if session.get("console") != live_session().session_id:
            return redirect(url_for("console.console_login"))
        return view(*args, **kwargs)

    return inner

