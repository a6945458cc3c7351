"""Pages: the phone page, joining by seat card, the console, seat cards and the export."""

from __future__ import annotations

import io
import re
import tempfile
import time
import zipfile
from functools import wraps
from pathlib import Path

import segno
from flask import (
    Blueprint,
    abort,
    current_app,
    redirect,
    render_template,
    request,
    send_file,
    session,
    url_for,
)
from flask_babel import gettext as _

from .export import export_session
from .live import SHORT_CODE_ALPHABET, SHORT_CODE_LENGTH, LiveSession, Registry
from .payment_sheet import money, sheet_csv
from .ratelimit import FailureLimiter

bp = Blueprint("web", __name__)
CARDS_PER_SHEET = 10
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


def phone_strings() -> dict[str, str]:
    """Every string the phone's script shows, translated here, on the server."""
    return {
        "connecting": _("Connecting…"),
        "offline": _("No connection. Your choices are kept and sent when it comes back."),
        "not_started": _("Please wait: the facilitator will start the game soon."),
        "paused": _("The game is paused. Please wait."),
        "waiting_block": _("This part of the game is over. Please wait for the next part."),
        "session_over": _("The game is over. Thank you for playing."),
        "your_seat": _("Seat %(seat)s of %(seats)s"),
        "block_round": _("Part %(block)s of %(blocks)s · round %(round)s"),
        "block_round_of": _("Part %(block)s of %(blocks)s · round %(round)s of %(rounds)s"),
        "stock": _("Shared stock now"),
        "how_many": _("How many will you take?"),
        "less": _("Take one less"),
        "more": _("Take one more"),
        "confirm": _("Confirm: take %(n)s"),
        "sending": _("Sending your choice…"),
        "recorded": _("Your choice is recorded: %(n)s. Waiting for the others."),
        "last_round": _("Last round"),
        "you_asked": _("You asked for"),
        "you_got": _("You got"),
        "group_took": _("Your group took"),
        "others_took": _("The others took"),
        "regrew": _("It grew back by"),
        "now_left": _("Shared stock now"),
        "rationed": _("There was not enough for everyone: shares were cut in proportion."),
        "your_points": _("Your points so far"),
        "talk": _("You may talk with your group for %(seconds)s seconds before choosing."),
        "danger_vague": _("There is a danger level: below it the stock may collapse and grow back slowly."),
        "danger_range": _(
            "Below a danger level somewhere between %(low)s and %(high)s the stock may collapse."
        ),
        "danger_exact": _("Below %(level)s the stock collapses and grows back slowly."),
        "danger_risk": _("Below %(level)s the stock collapses with a chance of %(percent)s%%."),
        "signal": _("Health of the stock: %(band)s, %(trend)s"),
        "band_calm": _("calm"),
        "band_watch": _("watch"),
        "band_alarm": _("alarm"),
        "trend_falling": _("falling"),
        "trend_steady": _("steady"),
        "trend_rising": _("rising"),
        "problem": _("Not accepted: %(message)s"),
        "unknown_seat": _("This seat card is not part of the game being played. Ask the facilitator."),
        "seat_released": _("The facilitator released this seat. If it is yours, scan your seat card again."),
    }


@bp.after_app_request
def safety_headers(response):
    """Nothing loads from elsewhere; a join link never leaks through a referrer."""
    response.headers.setdefault(
        "Content-Security-Policy",
        "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; "
        "connect-src 'self'; frame-ancestors 'none'; form-action 'self'",
    )
    response.headers.setdefault("X-Content-Type-Options", "nosniff")
    response.headers.setdefault("Referrer-Policy", "no-referrer")
    response.headers.setdefault("X-Frame-Options", "DENY")
    # Seat links and console pages carry secrets or hidden values: never kept in a cache.
    carries_secret = "secret" in (request.view_args or {}) or request.path.startswith("/console")
    if (request.endpoint or "").startswith("web.") and carries_secret:
        response.headers["Cache-Control"] = "no-store"
    lang = request.args.get("lang")
    if lang and registry().current_id and lang in registry().current.study.session.languages:
        response.set_cookie("lang", lang, samesite="Strict", max_age=30 * 86400)
    return response


@bp.get("/healthz")
def healthz():
    """Liveness probe for tests and scripts."""
    return {"ok": True, "session_id": registry().current_id}


@bp.get("/")
def index():
    """Phones that open the bare address land on the phone page."""
    return redirect(url_for("web.play"))


def _render_phone(secret: str | None = None, problem: str | None = None, status: int = 200):
    live = live_session()
    return render_template(
        "phone.html",
        title=live.study.session.title,
        secret=secret or "",
        problem=problem,
        strings=phone_strings(),
        code_length=SHORT_CODE_LENGTH,
    ), status


@bp.get("/play")
def play():
    """The phone page; the seat secret comes from the browser's storage."""
    return _render_phone()


@bp.get("/s/<secret>")
def join_by_card(secret: str):
    """The address in a seat card's QR code: remember the seat, then play."""
    if not SECRET_PATTERN.match(secret) or registry().seat_by_secret(secret) is None:
        return _render_phone(problem=_("This seat card is not part of the game being played. "
                                       "Ask the facilitator."), status=404)
    return _render_phone(secret=secret)


@bp.post("/join")
def join_by_code():
    """A typed short code: checked (with a limit on guesses), then on to the seat's page."""
    who = request.remote_addr or "?"
    guard = limiter("code")
    wait = guard.wait_seconds(who, time.monotonic())
    if wait > 0:
        return _render_phone(problem=_("Too many wrong codes. Try again in %(s)s seconds.", s=int(wait) + 1),
                             status=429)
    found = registry().seat_by_short_code(request.form.get("code", "")[:40])
    if found is None:
        guard.failed(who, time.monotonic())
        return _render_phone(
            problem=_("That code is not a seat of this game. A code has %(n)s letters and digits "
                      "(no 0, O, 1 or I), as printed on your card.", n=SHORT_CODE_LENGTH),
            status=400,
        )
    guard.succeeded(who)
    return redirect(url_for("web.join_by_card", secret=found[1].secret), code=303)


# -- console ---------------------------------------------------------------


def console_required(view):
    @wraps(view)
    def inner(*args, **kwargs):
        if session.get("console") != live_session().session_id:
            return redirect(url_for("web.console_login"))
        return view(*args, **kwargs)

    return inner


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
            session.clear()
            session["console"] = live.session_id
            return redirect(url_for("web.console"), code=303)
        else:
            guard.failed(who, time.monotonic())
            problem, status = _("Wrong PIN. The PIN was printed when the session was started."), 403
    return render_template("console_login.html", title=live.study.session.title, problem=problem), status


@bp.post("/console/logout")
def console_logout():
    """Forget the console login on this browser."""
    session.clear()
    return redirect(url_for("web.console_login"), code=303)


@bp.get("/console")
@console_required
def console():
    """The facilitator's screen: cautions, seats, pacing, results."""
    live = live_session()
    return render_template("console.html", title=live.study.session.title, session_id=live.session_id,
                           study=live.study)


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
    response = current_app.make_response(render_template(
        "cards.html", title=live.study.session.title, sheets=sheets, join_url=f"{base}/play",
        alphabet=SHORT_CODE_ALPHABET,
    ))
    response.headers["Cache-Control"] = "no-store"
    return response


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
                           sheet=sheet, money=money, spec=live.study.payment)


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
