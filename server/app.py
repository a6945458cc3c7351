"""The app factory: one Flask app and its Socket.IO server for one database."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from flask import Flask, request
from flask_babel import Babel, get_locale
from flask_socketio import SocketIO

from .guard import GuardedWSGI
from .resources import data_folder
from .serving import async_mode, run_blocking

MAX_MESSAGE_BYTES = 16_384  # no legitimate message comes near; a flood is cut at the edge

socketio = SocketIO()


def create_app(config: dict[str, Any] | None = None) -> Flask:
    """Build the app for one database; opens (or creates, or resumes) the session to serve.

    Config keys: ``EBBTIDE_DB`` (path, required), ``EBBTIDE_STUDY`` (a ``Study`` to
    serve: resumes its latest session, or reopens it read-only if it has ended, else
    creates one; a study file edited since is refused), ``EBBTIDE_NEW_SESSION`` (True:
    always create a new session), ``EBBTIDE_OPENED`` (set: new, resumed or reopened),
    ``EBBTIDE_SEED``, ``EBBTIDE_PIN``, ``EBBTIDE_PUBLIC_URL`` (the address printed on
    seat cards; defaults to the address the console was opened at),
    ``EBBTIDE_FLOOD_EVENTS`` (messages a phone may send per 10 s, default 20; the
    console gets three times as many), ``EBBTIDE_ASYNC_MODE`` (gevent | threading; default:
    gevent when the process is monkey-patched for it, else threading), ``EBBTIDE_GROUP_COMMIT``
    (default True; False commits every change on its own, for measurements).
    """
    from . import frame_guard, sockets, web  # noqa: F401 - sockets registers its handlers on import
    from .console import events as console_events  # noqa: F401 - registers handlers
    from .console import fallbacks  # noqa: F401 - registers handlers
    from .console import routes as console_routes
    from .phone import events as phone_events  # noqa: F401 - registers handlers
    from .phone import field_day as field_day_events  # noqa: F401 - registers handlers and /media
    from .phone import routes as phone_routes
    from .registry import Registry
    from .store import Store
    from .teach import pages as teach_pages

    app = Flask(
        "ebbtide.server",
        # ebbtide is a namespace package, where Flask cannot guess an instance folder; none is used.
        instance_path=str(Path(__file__).resolve().parent),
        template_folder=str(data_folder("templates")),
        static_folder=str(data_folder("static")),
    )
    app.config.update(
        EBBTIDE_PUBLIC_URL=None,
        BABEL_TRANSLATION_DIRECTORIES=str(data_folder("translations")),
        SESSION_COOKIE_SAMESITE="Strict",
        SESSION_COOKIE_HTTPONLY=True,
        MAX_CONTENT_LENGTH=MAX_MESSAGE_BYTES,
    )
    app.config.update(config or {})
    # Group commit unless EBBTIDE_GROUP_COMMIT=0 (one fsync per decision, kept to measure against).
    group_commit = app.config.get("EBBTIDE_GROUP_COMMIT", os.environ.get("EBBTIDE_GROUP_COMMIT", "1") != "0")
    store = Store(app.config["EBBTIDE_DB"], group_commit=group_commit, offload=run_blocking)
    registry = Registry(store)
    app.extensions["ebbtide"] = registry
    study = app.config.get("EBBTIDE_STUDY")
    if study is not None:
        opening = registry.start_or_resume(
            study, app.config.get("EBBTIDE_SEED"), app.config.get("EBBTIDE_PIN"),
            new_session=bool(app.config.get("EBBTIDE_NEW_SESSION")),
        )
        app.config["EBBTIDE_PIN"] = opening.pin
        app.config["EBBTIDE_SESSION_ID"] = opening.live.session_id
        app.config["EBBTIDE_OPENED"] = opening.how
        # The session's own key: console cookies stay valid when the server restarts.
        app.secret_key = opening.live.record.secret_key

    def select_locale() -> str | None:
        if registry.current_id is None:
            return "en"
        session_spec = registry.current.study.session
        for candidate in (request.args.get("lang"), request.cookies.get("lang")):
            if candidate in session_spec.languages:
                return candidate
        return session_spec.language

    Babel(app, locale_selector=select_locale)
    app.jinja_env.globals["get_locale"] = get_locale
    app.register_blueprint(web.bp)
    app.register_blueprint(phone_routes.bp)
    app.register_blueprint(console_routes.bp)
    app.register_blueprint(teach_pages.bp)
    socketio.init_app(
        app,
        # gevent in a monkey-patched ``serve`` process, threads elsewhere (server/serving.py).
        async_mode=app.config.get("EBBTIDE_ASYNC_MODE") or async_mode(),
        max_http_buffer_size=MAX_MESSAGE_BYTES,
        ping_interval=10,
        ping_timeout=20,
    )

    def refuse_event(sid: str, label: str) -> dict:
        with app.app_context():
            return sockets.refuse_unknown_event(sid, label)

    # Unreadable frames close their socket; names that are not our events are refused (frame_guard.py).
    frame_guard.install(socketio.server, refuse_event)
    # Outermost: security headers on every answer, Engine.IO's long-polling ones included.
    app.wsgi_app = GuardedWSGI(app.wsgi_app, MAX_MESSAGE_BYTES)
    return app
