"""The socket edge: who is connected, rooms, senders, flood limits and the checked handler wrapper.

The events themselves live with their client: ``phone/events.py`` and ``console/events.py``.

Phones identify themselves on every (re)connect with their seat secret and get
a full snapshot with a sequence number, so a missed event never matters. What
a phone receives as its screen is built only by ``game_logic.phone_snapshot``
(a validated ``PhoneSnapshot``, sent as its JSON dump). Every refusal reaches
the client twice: as the acknowledgement of its request and as a ``problem``
event, each with a code and a message that says what is allowed.
"""

from __future__ import annotations

import functools
import hmac
import logging
import threading
import time
from collections import deque
from collections.abc import Callable, Iterable
from dataclasses import dataclass

from flask import current_app, request, session
from flask_socketio import ConnectionRefusedError, disconnect, emit, join_room
from pydantic import BaseModel, ValidationError

from ebbtide.game_logic.errors import EbbtideError, Refused, ServerError

from .app import socketio
from .console.access import COOKIE_KEY, logins, rehearsal_token, request_login
from .console.refresh import refresh_for
from .frame_guard import RESERVED_EVENTS
from .messages import ConsoleAuth, PhoneAuth, from_validation_error
from .phone.held_snapshots import held_for
from .phone.refusals import phone_refusal
from .phone.view import remember_language, seat_language
from .registry import LiveSession, Registry
from .web import code_guard

FLOOD_EVENTS = 20  # per phone connection, within FLOOD_SECONDS; a person taps far less
CONSOLE_FLOOD_EVENTS = 60  # a facilitator typing slips seat by seat clicks more often
FLOOD_SECONDS = 10.0

log = logging.getLogger(__name__)


@dataclass
class Connection:
    """Who is at the other end of one socket."""

    role: str  # phone | console
    session_id: str
    group: int = -1
    seat: int = -1
    agent: str = "phone"
    recent: deque | None = None
    login: str = ""  # a console's server-side login id (console/access.py)
    device: str = ""


def registry() -> Registry:
    return current_app.extensions["ebbtide"]


def seat_room(session_id: str, group: int, seat: int) -> str:
    return f"seat:{session_id}:{group}:{seat}"


def group_room(session_id: str, group: int) -> str:
    return f"group:{session_id}:{group}"


def console_room(session_id: str) -> str:
    return f"console:{session_id}"


# Built and sent one at a time, so a seat never receives an older snapshot after a newer one
# (a held "recorded" snapshot and its group's result may be built on different tasks).
_SNAPSHOT_ORDER = threading.Lock()


def send_seat(live: LiveSession, group: int, seat: int) -> None:
    with _SNAPSHOT_ORDER:
        socketio.emit("snapshot", live.seat_snapshot(group, seat), to=seat_room(live.session_id, group, seat))


def send_group(live: LiveSession, group: int) -> None:
    held_for(current_app, live.session_id, send_seats_now).group_sent(group)
    send_seats_now(live, group, range(live.study.seats))


def send_seat_soon(live: LiveSession, group: int, seat: int) -> None:
    """A decided seat's own snapshot, unless its group's result follows at once (phone/held_snapshots.py)."""
    held_for(current_app, live.session_id, send_seats_now).decided(group, seat)


def send_seats_now(live: LiveSession, group: int, seats: Iterable[int]) -> None:
    for seat in seats:
        send_seat(live, group, seat)


def send_everyone(live: LiveSession) -> None:
    for group in range(live.study.groups.count):
        send_group(live, group)
    send_console(live)


def console_state(live: LiveSession) -> dict:
    """The console's snapshot, with a warning when seat codes are being guessed (``ratelimit``)."""
    snapshot = live.console_snapshot(registry().online())
    snapshot["guessing"] = code_guard().report(time.monotonic())
    return snapshot


def send_console(live: LiveSession) -> None:
    """Refresh the console soon: coalesced (console/refresh.py), so a burst of decisions is one state."""
    refresh_for(current_app, live.session_id, send_console_now).request()


def send_console_now(live: LiveSession) -> None:
    socketio.emit("console_state", console_state(live), to=console_room(live.session_id))


def flood_limit(role: str) -> int:
    """Messages one connection may send within FLOOD_SECONDS (``EBBTIDE_FLOOD_EVENTS`` overrides)."""
    limit = current_app.config.get("EBBTIDE_FLOOD_EVENTS") or FLOOD_EVENTS
    return limit * CONSOLE_FLOOD_EVENTS // FLOOD_EVENTS if role == "console" else limit


def _flooding(conn: Connection) -> bool:
    now = time.monotonic()
    recent = conn.recent
    with registry().flood_lock:  # one socket's events may run on several threads at once
        while recent and now - recent[0] > FLOOD_SECONDS:
            recent.popleft()
        recent.append(now)
        return len(recent) > flood_limit(conn.role)


def _admit(event: str, role: str | None, sid: str | None = None) -> Connection:
    """The connection behind this request (or ``sid``), if it may send ``event`` now; else ``Refused``."""
    conn = registry().connection(sid or request.sid)
    if conn is None or (role is not None and conn.role != role):
        raise Refused("not_allowed", f"{event!r} is not allowed on this connection")
    if conn.role == "console" and not logins().check(conn.login, conn.session_id, time.monotonic()):
        raise Refused("logged_out", "this console login has ended (logged out, or idle too long); "
                      "log in again with the PIN")
    if _flooding(conn):
        limit = flood_limit(conn.role)
        raise Refused("too_many", f"more than {limit} messages in {FLOOD_SECONDS:g} s; slow down")
    return conn


def edge(event: str, model: type[BaseModel], role: str) -> Callable:
    """Register a handler that gets a checked message, or answers with a refusal.

    Every failure is answered (acknowledgement and ``problem`` event): a named
    error with its code, anything unexpected with ``server_error``.
    """

    def wrap(handler: Callable) -> Callable:
        @functools.wraps(handler)
        def inner(*args):
            conn = None
            try:
                conn = _admit(event, role)
                if len(args) > 1:
                    raise Refused("bad_request", f"{len(args)} arguments sent; allowed: one message object")
                data = args[0] if args else None
                message = model.model_validate({} if data is None else data)
                return handler(conn, registry().current, message)
            except ValidationError as exc:
                refusal = from_validation_error(exc)
            except EbbtideError as exc:  # every named error of the core: its code and one line
                refusal = exc
            except Exception:
                # Unexpected (a locked or full disk, a bug): logged here with its traceback,
                # answered so the client stops waiting; nothing was stored, so it may resend.
                log.exception("socket event %r failed unexpectedly", event)
                refusal = ServerError()
            body = refusal.as_event(event)
            if conn is not None and conn.role == "phone":  # a phone reads it in its seat's language
                body = phone_refusal(body, seat_language(registry().current, conn.group, conn.seat))
            emit("problem", body)
            return body

        socketio.on(event)(inner)
        return inner

    return wrap


def phones_to_take_over_from(reg: Registry, group: int, seat: int, phone: PhoneAuth) -> list[str]:
    """Sockets of other phones holding this seat now; refused unless the person confirmed taking over.

    Two phones acting for one seat see each other's choices appear, so the second one is told
    plainly and asked first (its page offers the take-over, which sends ``take_over``).
    """
    others = [sid for sid in reg.seat_sids(group, seat)
              if (conn := reg.connection(sid)) is not None and conn.device != phone.device]
    if others and not phone.take_over:
        raise ConnectionRefusedError(
            "this seat is already in use on another phone; take it over only if it is yours",
            {"code": "seat_in_use"},
        )
    return others


def let_go_of(live: LiveSession, sids: list[str]) -> None:
    """Tell the phones a seat was taken over from, then close their connections."""
    notice = Refused("seat_taken", "this seat was taken over on another phone").as_event("seat_taken")
    for sid in sids:
        socketio.emit("seat_taken", notice, to=sid)
        disconnect(sid=sid, namespace="/")


@socketio.on("connect")
def on_connect(auth=None):
    """Admit a phone by its seat secret, or the console by its signed cookie."""
    reg = registry()
    if reg.current_id is None:
        raise ConnectionRefusedError("no session is open")
    live = reg.current
    if isinstance(auth, dict) and auth.get("role") == "console":
        try:
            ConsoleAuth.model_validate(auth)
        except ValidationError as exc:
            raise ConnectionRefusedError(from_validation_error(exc).message) from exc
        login = request_login(live.session_id, time.monotonic())
        if login is None:
            raise ConnectionRefusedError("log in to the console with its PIN first", {"code": "login_needed"})
        login_id = session[COOKIE_KEY]
        logins().attach(login_id, request.sid)
        reg.remember(request.sid, Connection("console", live.session_id, recent=deque(), login=login_id))
        join_room(console_room(live.session_id))
        emit("console_state", console_state(live))
        return
    try:
        phone = PhoneAuth.model_validate(auth if auth is not None else {})
    except ValidationError as exc:
        problem = from_validation_error(exc).message
        raise ConnectionRefusedError(
            f"a seat secret and a device id are needed ({problem}); open the link on your seat card"
        ) from exc
    found = reg.seat_by_secret(phone.secret)
    if found is None:
        raise ConnectionRefusedError("this seat card does not belong to the session being played")
    live, key = found
    if phone.agent == "bot" and not hmac.compare_digest(
        phone.rehearsal or "", rehearsal_token(live.record.secret_key)
    ):
        raise ConnectionRefusedError("only the rehearsal command may play a seat as a bot; "
                                     "a phone connects without 'agent'", {"code": "not_a_bot"})
    seat = (key.group, key.seat)
    taken_from = phones_to_take_over_from(reg, key.group, key.seat, phone)
    if phone.device not in live.state.devices.get(seat, []):
        if seat in live.state.released and not phone.fresh:
            # A device the facilitator let go of comes back from its storage: it needs the card again.
            raise ConnectionRefusedError(
                "the facilitator released this seat; scan your seat card again to take it back",
                {"code": "seat_released"},
            )
        live.submit("seat_claimed", {"group": key.group, "seat": key.seat, "device": phone.device,
                                     "via": "card" if phone.fresh else "stored"})
    reg.remember(request.sid, Connection("phone", live.session_id, key.group, key.seat, phone.agent,
                                         recent=deque(), device=phone.device))
    let_go_of(live, taken_from)
    join_room(group_room(live.session_id, key.group))
    join_room(seat_room(live.session_id, key.group, key.seat))
    remember_language(live, key.group, key.seat)  # the seat's words follow its phone
    emit("snapshot", live.seat_snapshot(key.group, key.seat))
    send_console(live)


@socketio.on("disconnect")
def on_disconnect(*_reason):
    """Forget the connection; the seat stays claimed and its decisions stay stored."""
    reg = registry()
    conn = reg.connection(request.sid)
    reg.forget(request.sid)
    if conn is not None and conn.login:
        logins().detach(conn.login, request.sid)
    if conn is not None and conn.role == "phone" and reg.current_id == conn.session_id:
        send_console(reg.current)  # the console shows which phones are offline


def refuse_unknown_event(sid: str, label: str) -> dict:
    """An event that is not ours (unknown, a reserved name, not even a name): refused, flood-counted.

    Called by ``frame_guard`` before python-socketio dispatches anything, so names like
    ``connect`` or ``disconnect`` never reach the connection handlers.
    """
    try:
        _admit(label, None, sid)
        handlers = socketio.server.handlers.get("/", {})
        known = sorted(name for name in handlers if name not in RESERVED_EVENTS)
        raise Refused("unknown_event", f"unknown event {label!r}; allowed: {', '.join(known)}")
    except Refused as refusal:
        return refusal.as_event(label)


def _session_just_ended(live: LiveSession, change) -> bool:
    """The last group's last round ends the session: every phone must hear it, not just that group."""
    return bool(change.resolved) and live.state.status == "ended"


