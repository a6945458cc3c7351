"""Console pages: PIN login, the facilitator's screen, seat cards, export and payment sheet."""

from __future__ import annotations

import io
import tempfile
import time
import zipfile
from pathlib import Path

import segno
from flask import Blueprint, current_app, redirect, render_template, request, send_file, session, url_for
from flask_babel import gettext as _

from ebbtide.game_logic.money import decimal_text

from ..app import socketio
from ..phone.view import participant_title
from ..registry import SHORT_CODE_ALPHABET
from ..store.export import export_session
from ..web import console_required, limiter, live_session
from . import access
from .payment_sheet import money, sheet_csv

bp = Blueprint("console", __name__)
CARDS_PER_SHEET = 10


@bp.route("/console/login", methods=["GET", "POST"])
def console_login():
    """PIN check (against its hash), then a signed session cookie; wrong guesses slow down."""
    live = live_session()
    problem = None
    status = 200
    if request.method == "POST":
        who = request.remote_addr or "?"
        guard = limiter("pin")
        wait = guard.wait_seconds(who, time.monotonic())
        if wait > 0:
            problem, status = _("Too many wrong PINs. Try again in %(s)s seconds.", s=int(wait) + 1), 429
        elif live.pin_matches(request.form.get("pin", "")[:40]):
            guard.succeeded(who)
            access.logins().revoke(session.get(access.COOKIE_KEY))
            session.clear()
            session[access.COOKIE_KEY] = access.logins().open(live.session_id, time.monotonic())
            return redirect(url_for("console.console"), code=303)
        else:
            guard.failed(who, time.monotonic())
            problem, status = _("Wrong PIN. The PIN was printed when the session was started."), 403
    return render_template("console_login.html", title=live.study.session.title, problem=problem), status


@bp.post("/console/logout")
@console_required
def console_logout():
    """End this console login on the server: the cookie opens nothing any more, its sockets close."""
    for sid in access.logins().revoke(session.get(access.COOKIE_KEY)):
        socketio.server.disconnect(sid)
    session.clear()
    return redirect(url_for("console.console_login"), code=303)


@bp.app_context_processor
def console_form_token() -> dict:
    """``form_token()`` in console templates: the hidden field every console form sends."""

    def form_token() -> str:
        registry = current_app.extensions["ebbtide"]
        if registry.current_id is None:
            return ""
        login = access.request_login(registry.current_id, time.monotonic())
        return login.form_token if login else ""

    return {"form_token": form_token, "form_token_field": access.FORM_FIELD}


@bp.get("/console")
@console_required
def console():
    """The facilitator's screen: cautions, seats, pacing, results."""
    live = live_session()
    return render_template("console.html", title=live.study.session.title, session_id=live.session_id,
                           study=live.study)


@bp.get("/console/seat/<int:group>/<int:seat>")
@console_required
def open_seat(group: int, seat: int):
    """Try the game on one laptop: a new tab takes one seat, as its card's QR code would."""
    live = live_session()
    key = next((k for k in live.keys if (k.group + 1, k.seat + 1) == (group, seat)), None)
    if key is None:
        message = _("There is no seat %(seat)s in group %(group)s; groups run from 1 to %(groups)s, "
                    "seats from 1 to %(seats)s.", seat=seat, group=group, groups=live.study.groups.count,
                    seats=live.study.seats)
        return render_template("teach_refused.html", title=live.study.session.title, message=message), 404
    return redirect(url_for("phone.join_by_card", secret=key.secret), code=303)


def join_base_url() -> str:
    base = current_app.config.get("EBBTIDE_PUBLIC_URL") or request.host_url
    return base.rstrip("/")


@bp.get("/console/cards")
@console_required
def seat_cards():
    """Printable seat cards (A4, ten a sheet): QR code with the join link, and a short code."""
    live = live_session()
    base = join_base_url()
    cards = []
    for key in live.keys:
        link = f"{base}/s/{key.secret}"
        cards.append({
            "group": key.group + 1,
            "seat": key.seat + 1,
            "short_code": " ".join([key.short_code[:3], key.short_code[3:]]),
            "qr_svg": segno.make(link, error="m").svg_inline(border=2, omitsize=True),
        })
    sheets = [cards[i:i + CARDS_PER_SHEET] for i in range(0, len(cards), CARDS_PER_SHEET)]
    return render_template(
        "cards.html", title=participant_title(live.study), sheets=sheets, join_url=f"{base}/play",
        alphabet=SHORT_CODE_ALPHABET,
    )


@bp.get("/console/export.zip")
@console_required
def export_zip():
    """The session's export tables as one zip file."""
    live = live_session()
    buffer = io.BytesIO()
    with tempfile.TemporaryDirectory() as tmp:
        folder = export_session(live.store, live.session_id, Path(tmp) / live.session_id)
        with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
            for path in sorted(folder.iterdir()):
                archive.write(path, f"{live.session_id}/{path.name}")
    buffer.seek(0)
    return send_file(buffer, mimetype="application/zip", as_attachment=True,
                     download_name=f"{live.session_id}.zip")


@bp.get("/console/payments")
@console_required
def payments():
    """Printable payment sheet: points and cash per seat, per group, in total, and the notes to bring."""
    live = live_session()
    sheet = live.payment_sheet()
    return render_template("payments.html", title=live.study.session.title, session_id=live.session_id,
                           sheet=sheet, money=money, exact=decimal_text, spec=live.study.payment)


@bp.get("/console/payments.csv")
@console_required
def payments_csv():
    """The payment sheet as CSV."""
    live = live_session()
    sheet = live.payment_sheet()
    response = current_app.make_response(sheet_csv(sheet))
    response.mimetype = "text/csv"
    response.headers["Content-Disposition"] = f'attachment; filename="{live.session_id}-payments.csv"'
    return response
