"""Socket events of phones and the console: validate -> call the session -> emit to rooms.

Phones identify themselves on every (re)connect with their seat secret and get
a full snapshot with a sequence number, so a missed event never matters. What
a phone receives is built only by ``SessionState.seat_snapshot`` (the
treatment's ``participant_view`` plus neutral UI state). Every refusal reaches
the client twice: as the acknowledgement of its request and as a ``problem``
event, each with a code and a message that says what is allowed.
"""

from __future__ import annotations

import functools
import time
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass

from flask import current_app, request, session
from flask_socketio import ConnectionRefusedError, disconnect, emit, join_room
from pydantic import BaseModel, ValidationError

from . import socketio
from .live import LiveSession, Registry
from .messages import (
    ConsoleAuth,
    ConsoleCorrection,
    ConsoleHarvest,
    Empty,
    GroupAction,
    GroupTarget,
    HarvestRequest,
    PaperSlips,
    PhoneAuth,
    SeatAction,
)
from .phone_view import remember_language
from .refusals import Refused, from_validation_error
from .talk import refuse_during_talk, register_console_events

FLOOD_EVENTS = 20  # per phone connection, within FLOOD_SECONDS; a person taps far less
CONSOLE_FLOOD_EVENTS = 60  # a facilitator typing slips seat by seat clicks more often
FLOOD_SECONDS = 10.0


@dataclass
class Connection:
    """Who is at the other end of one socket."""

    role: str  # phone | console
    session_id: str
    group: int = -1
    seat: int = -1
    agent: str = "phone"
    recent: deque | None = None


def registry() -> Registry:
    return current_app.extensions["ebbtide"]


def seat_room(session_id: str, group: int, seat: int) -> str:
    return f"seat:{session_id}:{group}:{seat}"


def group_room(session_id: str, group: int) -> str:
    return f"group:{session_id}:{group}"


def console_room(session_id: str) -> str:
    return f"console:{session_id}"


def send_seat(live: LiveSession, group: int, seat: int) -> None:
    socketio.emit("snapshot", live.seat_snapshot(group, seat), to=seat_room(live.session_id, group, seat))


def send_group(live: LiveSession, group: int) -> None:
    for seat in range(live.study.seats):
        send_seat(live, group, seat)


def send_everyone(live: LiveSession) -> None:
    for group in range(live.study.groups.count):
        send_group(live, group)
    send_console(live)


def send_console(live: LiveSession) -> None:
    snapshot = live.console_snapshot(registry().online())
    socketio.emit("console_state", snapshot, to=console_room(live.session_id))


def flood_limit(role: str) -> int:
    """Messages one connection may send within FLOOD_SECONDS (``EBBTIDE_FLOOD_EVENTS`` overrides)."""
    limit = current_app.config.get("EBBTIDE_FLOOD_EVENTS") or FLOOD_EVENTS
    return limit * CONSOLE_FLOOD_EVENTS // FLOOD_EVENTS if role == "console" else limit


def _flooding(conn: Connection) -> bool:
    now = time.monotonic()
    recent = conn.recent
    while recent and now - recent[0] > FLOOD_SECONDS:
        recent.popleft()
    recent.append(now)
    return len(recent) > flood_limit(conn.role)


def _admit(event: str, role: str | None) -> Connection:
    """The connection behind this request, if it may send ``event`` now; else ``Refused``."""
    conn = registry().connection(request.sid)
    if conn is None or (role is not None and conn.role != role):
        raise Refused("not_allowed", f"{event!r} is not allowed on this connection")
    if _flooding(conn):
        limit = flood_limit(conn.role)
        raise Refused("too_many", f"more than {limit} messages in {FLOOD_SECONDS:g} s; slow down")
    return conn


def edge(event: str, model: type[BaseModel], role: str) -> Callable:
    """Register a handler that gets a checked message, or answers with a refusal."""

    def wrap(handler: Callable) -> Callable:
        @functools.wraps(handler)
        def inner(*args):
            try:
                conn = _admit(event, role)
                if len(args) > 1:
                    raise Refused("bad_request", f"{len(args)} arguments sent; allowed: one message object")
                data = args[0] if args else None
                message = model.model_validate({} if data is None else data)
                return handler(conn, registry().current, message)
            except ValidationError as exc:
                refusal = from_validation_error(exc)
            except Refused as exc:
                refusal = exc
            body = refusal.as_event(event)
            emit("problem", body)
            return body

        socketio.on(event)(inner)
        return inner

    return wrap


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
        if session.get("console") != live.session_id:
            raise ConnectionRefusedError("log in to the console with its PIN first")
        reg.remember(request.sid, Connection("console", live.session_id, recent=deque()))
        join_room(console_room(live.session_id))
        emit("console_state", live.console_snapshot(reg.online()))
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
    seat = (key.group, key.seat)
    if phone.device not in live.state.devices.get(seat, []):
        if seat in live.state.released and not phone.fresh:
            # A device the facilitator let go of comes back from its storage: it needs the card again.
            raise ConnectionRefusedError(
                "the facilitator released this seat; scan your seat card again to take it back",
                {"code": "seat_released"},
            )
        live.submit("seat_claimed", {"group": key.group, "seat": key.seat, "device": phone.device,
                                     "via": "card" if phone.fresh else "stored"})
    reg.remember(
        request.sid, Connection("phone", live.session_id, key.group, key.seat, phone.agent, recent=deque())
    )
    join_room(group_room(live.session_id, key.group))
    join_room(seat_room(live.session_id, key.group, key.seat))
    remember_language(live, key.group, key.seat)  # teach: the seat's words follow its phone
    emit("snapshot", live.seat_snapshot(key.group, key.seat))
    send_console(live)


@socketio.on("disconnect")
def on_disconnect(*_reason):
    """Forget the connection; the seat stays claimed and its decisions stay stored."""
    reg = registry()
    conn = reg.connection(request.sid)
    reg.forget(request.sid)
    if conn is not None and conn.role == "phone" and reg.current_id == conn.session_id:
        send_console(reg.current)  # the console shows which phones are offline


@socketio.on("*")
def on_unknown(event, *_args):
    """Any event nobody handles: refused, saying which events exist."""
    try:
        _admit(str(event)[:40], None)
        known = sorted(name for name in socketio.server.handlers.get("/", {}) if name not in RESERVED)
        raise Refused("unknown_event", f"unknown event {str(event)[:40]!r}; allowed: {', '.join(known)}")
    except Refused as refusal:
        body = refusal.as_event(str(event)[:40])
        emit("problem", body)
        return body


RESERVED = frozenset({"connect", "disconnect", "*"})


def _session_just_ended(live: LiveSession, change) -> bool:
    """The last group's last round ends the session: every phone must hear it, not just that group."""
    return bool(change.resolved) and live.state.status == "ended"


@edge("harvest", HarvestRequest, role="phone")
def on_harvest(conn: Connection, live: LiveSession, msg: HarvestRequest):
    """A seat's harvest: stored (committed) before it is acknowledged."""
    own = (conn.group + 1, conn.seat + 1)
    if (msg.group or own[0], msg.seat or own[1]) != own:
        raise Refused("not_your_seat", f"this phone holds group {own[0]}, seat {own[1]}; "
                      "a phone decides only for its own seat")
    body = {
        "group": conn.group, "seat": conn.seat, "block": msg.block, "round": msg.round,
        "harvest": msg.harvest, "source": conn.agent,
    }
    if msg.decision_id not in live.state.receipts:  # teach: no choices while the group talks
        refuse_during_talk(live, conn.group, msg.block, msg.round)
    change = live.submit("harvest_submitted", body, decision_id=msg.decision_id)
    if change.is_new:
        if _session_just_ended(live, change):
            send_everyone(live)
        elif change.resolved:
            send_group(live, conn.group)
        else:
            send_seat(live, conn.group, conn.seat)
        send_console(live)
    receipt = change.receipt
    return {
        "ok": True, "decision_id": msg.decision_id, "seq": change.seq, "repeated": not change.is_new,
        "block": receipt.block, "round": receipt.round, "harvest": receipt.harvest,
    }


@edge("snapshot_please", Empty, role="phone")
def on_snapshot_request(conn: Connection, live: LiveSession, msg: Empty):
    """A phone that doubts its screen asks for the full state again."""
    return {"ok": True, "snapshot": live.seat_snapshot(conn.group, conn.seat)}


def _session_action(kind: str) -> Callable:
    def handler(conn: Connection, live: LiveSession, msg: Empty):
        change = live.submit(kind, {})
        send_everyone(live)
        return {"ok": True, "seq": change.seq}

    handler.__doc__ = f"Facilitator: record {kind} and tell everyone."
    return handler


for _event, _kind in (
    ("console_start", "session_started"),
    ("console_pause", "session_paused"),
    ("console_resume", "session_resumed"),
    ("console_end", "session_ended"),
):
    edge(_event, Empty, role="console")(_session_action(_kind))


def _groups(live: LiveSession, target: GroupTarget, ready: Callable[[int], bool]) -> list[int]:
    if target.group is None:
        chosen = [g for g in range(live.study.groups.count) if ready(g)]
        if not chosen:
            raise Refused("nothing_to_do", "no group is in a state where this applies")
        return chosen
    if target.group > live.study.groups.count:
        count = live.study.groups.count
        raise Refused("unknown_group", f"group {target.group} does not exist; allowed: 1..{count}")
    return [target.group - 1]


@edge("console_close_round", GroupTarget, role="console")
def on_close_round(conn: Connection, live: LiveSession, msg: GroupTarget):
    """Facilitator: resolve the open round now; seats that have not decided take 0."""

    def open_round(g: int) -> bool:
        progress = live.state.groups[g]
        return not (progress.waiting or progress.state.block_over)

    for g in _groups(live, msg, open_round):
        state = live.state.groups[g].state
        live.submit("round_closed", {"group": g, "block": state.block + 1, "round": state.round + 1})
        send_group(live, g)
    if live.state.status == "ended":
        send_everyone(live)  # the last round closed ended the session: every phone hears it
    send_console(live)
    return {"ok": True, "seq": live.state.seq}


@edge("console_open_block", GroupTarget, role="console")
def on_open_block(conn: Connection, live: LiveSession, msg: GroupTarget):
    """Facilitator: move a group (or every waiting group) into its next block."""
    for g in _groups(live, msg, lambda g: live.state.groups[g].waiting):
        live.submit("block_opened", {"group": g})
        send_group(live, g)
    send_console(live)
    return {"ok": True, "seq": live.state.seq}


# teach: the console extends or ends a group's talk pause (server/talk.py)
register_console_events(edge, send_group, send_console)


# -- console fall-backs: a dead phone, paper slips, a paused group, a correction, a released seat --


def _console_body(msg, **extra) -> dict:
    body = {"group": msg.group - 1, "block": msg.block, "round": msg.round, "source": "console",
            "by": msg.by or "console"}
    body.update(extra)
    return body


def _after_group_change(live: LiveSession, group: int, change) -> None:
    if change.is_new:
        if _session_just_ended(live, change):
            send_everyone(live)
        else:
            send_group(live, group)
        send_console(live)


def _check_group(live: LiveSession, group: int) -> None:
    if group > live.study.groups.count:
        count = live.study.groups.count
        raise Refused("unknown_group", f"group {group} does not exist; allowed: 1..{count}")


@edge("console_enter", ConsoleHarvest, role="console")
def on_console_enter(conn: Connection, live: LiveSession, msg: ConsoleHarvest):
    """Facilitator: enter a harvest for a seat whose phone died (source ``console``)."""
    _check_group(live, msg.group)
    body = _console_body(msg, seat=msg.seat - 1, harvest=msg.harvest)
    change = live.submit("harvest_submitted", body, decision_id=msg.decision_id)
    _after_group_change(live, msg.group - 1, change)
    return {"ok": True, "seq": change.seq, "repeated": not change.is_new}


@edge("console_correct", ConsoleCorrection, role="console")
def on_console_correct(conn: Connection, live: LiveSession, msg: ConsoleCorrection):
    """Facilitator: replace a seat's entry of the open round with a new one (the old stays logged)."""
    _check_group(live, msg.group)
    body = _console_body(msg, seat=msg.seat - 1, harvest=msg.harvest, supersedes=msg.supersedes)
    change = live.submit("harvest_corrected", body, decision_id=msg.decision_id)
    _after_group_change(live, msg.group - 1, change)
    return {"ok": True, "seq": change.seq, "repeated": not change.is_new}


@edge("console_slips", PaperSlips, role="console")
def on_console_slips(conn: Connection, live: LiveSession, msg: PaperSlips):
    """Facilitator: a whole group's round from paper slips, stored together or not at all."""
    _check_group(live, msg.group)
    if len(msg.harvests) != live.study.seats:
        raise Refused("bad_request", f"{len(msg.harvests)} slips given; allowed: one per seat, "
                      f"{live.study.seats} (leave a seat empty to keep it as it is)")
    requests = [
        ("harvest_submitted", _console_body(msg, seat=s, harvest=h, slip=True), f"{msg.batch_id}-s{s + 1}")
        for s, h in enumerate(msg.harvests) if h is not None
    ]
    if not requests:
        raise Refused("nothing_to_do", "every slip is empty; type at least one harvest")
    change = live.submit_many(requests)
    _after_group_change(live, msg.group - 1, change)
    return {"ok": True, "seq": change.seq, "repeated": not change.is_new, "entered": len(requests)}


def _group_toggle(kind: str) -> Callable:
    def handler(conn: Connection, live: LiveSession, msg: GroupAction):
        _check_group(live, msg.group)
        change = live.submit(kind, {"group": msg.group - 1, "by": msg.by or "console"})
        _after_group_change(live, msg.group - 1, change)
        return {"ok": True, "seq": change.seq}

    handler.__doc__ = f"Facilitator: record {kind} for one group."
    return handler


edge("console_pause_group", GroupAction, role="console")(_group_toggle("group_paused"))
edge("console_resume_group", GroupAction, role="console")(_group_toggle("group_resumed"))


@edge("console_release_seat", SeatAction, role="console")
def on_console_release_seat(conn: Connection, live: LiveSession, msg: SeatAction):
    """Facilitator: let go of every device on a seat; the next one must present the card again."""
    _check_group(live, msg.group)
    group, seat = msg.group - 1, msg.seat - 1
    change = live.submit("seat_released", {"group": group, "seat": seat, "by": msg.by or "console"})
    notice = Refused("seat_released", "the facilitator released this seat; "
                     "scan your seat card again to take it back").as_event("seat_released")
    socketio.emit("seat_released", notice, to=seat_room(live.session_id, group, seat))
    for sid in registry().seat_sids(group, seat):
        disconnect(sid=sid, namespace="/")
    send_console(live)
    return {"ok": True, "seq": change.seq}
