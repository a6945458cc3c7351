"""The shared HTTP edge: health probe, origin checks, access helpers (headers: ``guard.GuardedWSGI``)."""

from __future__ import annotations

import re
import time
from functools import wraps

from flask import Blueprint, abort, current_app, redirect, render_template, request, url_for
from flask_babel import gettext as _

from .console.access import SAFE_METHODS, cross_origin, form_token_ok, request_login
from .ratelimit import CodeGuard, FailureLimiter
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
    return registry().limiter(name)


def code_guard() -> CodeGuard:
    """The typed seat code's limits (per address, per device, one budget for all)."""
    return current_app.extensions.setdefault("ebbtide_code_guard", CodeGuard())


@bp.after_app_request
def remember_language(response):
    """A ``?lang=`` choice sticks for later pages (security headers: ``guard.GuardedWSGI``)."""
    lang = request.args.get("lang")
    if lang and registry().current_id and lang in registry().current.study.session.languages:
        response.set_cookie("lang", lang, samesite="Strict", max_age=30 * 86400)
    return response


@bp.get("/healthz")
def healthz():
    """Liveness probe for tests and scripts; names the server (gevent | threading) that answers."""
    served_by = current_app.extensions["socketio"].server.eio.async_mode
    return {"ok": True, "session_id": registry().current_id, "server": served_by}


@bp.get("/favicon.ico")
def favicon():
    """Browsers ask for this by themselves; a small drawing from static, never a 404 in the log."""
    return current_app.send_static_file("favicon.svg"), 200, {"Content-Type": "image/svg+xml"}



def _refuse_forged():
    live = live_session()
    message = _("This request did not come from this console's own page. Reload the console and try again.")
    return render_template("teach_refused.html", title=live.study.session.title, message=message), 403


@bp.before_app_request
def refuse_other_origins():
    """A form sent from another site (its Origin or Referer names it) changes nothing."""
    if request.method not in SAFE_METHODS and cross_origin():
        return _refuse_forged()
    return None


def console_required(view):
    """A live server-side console login (``console/access.py``); forms must carry its token."""

    @wraps(view)
    def inner(*args, **kwargs):
        login = request_login(live_session().session_id, time.monotonic())
        if login is None:
            return redirect(url_for("console.console_login"))
        if request.method not in SAFE_METHODS and not form_token_ok(login):
            return _refuse_forged()
        return view(*args, **kwargs)

    return inner
