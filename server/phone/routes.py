"""Phone pages: the play page, joining by seat card or by typed short code."""

from __future__ import annotations

import secrets
import time

from flask import Blueprint, current_app, redirect, render_template, request, url_for
from flask_babel import gettext as _

from ..registry import SHORT_CODE_LENGTH
from ..web import SECRET_PATTERN, code_guard, live_session, registry
from .view import participant_title

bp = Blueprint("phone", __name__)


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
        "retrying": _("Your choice is not saved yet. It is kept on this phone and sent again in a moment."),
        "recorded": _("Your choice is recorded: %(n)s. Waiting for the others."),
        "last_round": _("Last round"),
        "you_asked": _("You asked for"),
        "no_choice": _("no choice reached the laptop in time"),
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
        "seat_in_use": _("This seat is already in use on another phone. If it is your seat, take it over: "
                         "the other phone then stops playing it."),
        "seat_taken": _("This seat was taken over on another phone. If it is your seat, take it back."),
        "take_over": _("Take over this seat"),
        "debrief_previous": _("Previous part"),
        "debrief_next": _("Next part"),
    }



@bp.get("/")
def index():
    """Phones that open the bare address land on the phone page."""
    return redirect(url_for("phone.play"))


def _render_phone(secret: str | None = None, problem: str | None = None, status: int = 200):
    live = live_session()
    return render_template(
        "phone.html",
        title=participant_title(live.study),  # never the researcher's session.title
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


DEVICE_COOKIE = "join_device"


@bp.post("/join")
def join_by_code():
    """A typed short code: checked (with limits on guesses), then on to the seat's page.

    Failures count per address and per device (a cookie) and against one budget for
    everyone; a success clears nothing, so mixing in one's own code buys no guesses.
    """
    device = request.cookies.get(DEVICE_COOKIE, "")
    if not SECRET_PATTERN.match(device):
        device = secrets.token_urlsafe(18)
    keys = [f"address:{request.remote_addr or '?'}", f"device:{device}"]
    guard = code_guard()
    now = time.monotonic()
    wait = guard.wait_seconds(keys, now)
    if wait > 0:
        page, status = _render_phone(problem=_("Too many wrong codes. Try again in %(s)s seconds.",
                                               s=int(wait) + 1), status=429)
    else:
        found = registry().seat_by_short_code(request.form.get("code", "")[:40])
        if found is not None:
            return redirect(url_for("phone.join_by_card", secret=found[1].secret), code=303)
        guard.failed(keys, now)
        if guard.report(now) is not None:
            from ..sockets import send_console  # sockets registers handlers on import; imported late

            send_console(live_session())  # the console shows that codes are being guessed
        page, status = _render_phone(
            problem=_("That code is not a seat of this game. A code has %(n)s letters and digits "
                      "(no 0, O, 1 or I), as printed on your card.", n=SHORT_CODE_LENGTH),
            status=400,
        )
    response = current_app.make_response((page, status))
    response.set_cookie(DEVICE_COOKIE, device, max_age=86400, httponly=True, samesite="Strict")
    return response


# -- console ---------------------------------------------------------------
