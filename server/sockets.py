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
from flask_socketio import ConnectionRefusedError, emit, join_room
from pydantic import BaseModel, ValidationError

from . import socketio
from .live import LiveSession, Registry
from .messages import ConsoleAuth, Empty, GroupTarget, HarvestRequest, PhoneAuth
from .phone_view import remember_language
from .refusals import Refused, from_validation_error
from .talk import refuse_during_talk, register_console_events

FLOOD_EVENTS = 20  # per connection, within FLOOD_SECONDS; a person taps far less
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
    socketio.emit("console_state", live.console_snapshot(), to=console_room(live.session_id))


def _flooding(conn: Connection) -> bool:
    now = time.monotonic()
    recent = conn.recent
    while recent and now - recent[0] > FLOOD_SECONDS:
        recent.popleft()
    recent.append(now)
    return len(recent) > FLOOD_EVENTS


def edge(event: str, model: type[BaseModel], role: str) -> Callable:
    """Register a handler that gets a checked message, or answers with a refusal."""

    def wrap(handler: Callable) -> Callable:
        @functools.wraps(handler)
        def inner(data=None):
            try:
                conn = registry().connection(request.sid)
                if conn is None or conn.role != role:
                    raise Refused("not_allowed", f"{event!r} is not allowed on this connection")
                if _flooding(conn):
                    raise Refused(
                        "too_many", f"more than {FLOOD_EVENTS} messages in {FLOOD_SECONDS:g} s; slow down"
                    )
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
        emit("console_state", live.console_snapshot())
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
    if phone.device not in live.state.devices.get((key.group, key.seat), []):
        live.submit("seat_claimed", {"group": key.group, "seat": key.seat, "device": phone.device})
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
    registry().forget(request.sid)


@edge("harvest", HarvestRequest, role="phone")
def on_harvest(conn: Connection, live: LiveSession, msg: HarvestRequest):
    """A seat's harvest: stored (committed) before it is acknowledged."""
    body = {
        "group": conn.group, "seat": conn.seat, "block": msg.block, "round": msg.round,
        "harvest": msg.harvest, "source": conn.agent,
    }
    if msg.decision_id not in live.state.receipts:  # teach: no choices while the group talks
        refuse_during_talk(live, conn.group, msg.block, msg.round)
    change = live.submit("harvest_submitted", body, decision_id=msg.decision_id)
    if change.is_new:
        if change.resolved:
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
