"""Console fall-backs: a dead phone, paper slips, a paused group, a correction, a released seat."""

from __future__ import annotations

from collections.abc import Callable

from flask_socketio import disconnect

from ebbtide.game_logic.errors import Refused

from ..app import socketio
from ..messages import ConsoleCorrection, ConsoleHarvest, GroupAction, PaperSlips, SeatAction
from ..registry import LiveSession
from ..sockets import (
    Connection,
    _session_just_ended,
    edge,
    registry,
    seat_room,
    send_console,
    send_everyone,
    send_group,
)


def _console_body(msg, **extra) -> dict:
    """An entry's event body; refused without initials, so the log says who typed it."""
    if not msg.by.strip():
        raise Refused("initials_needed", "type your initials in the 'Your initials' box first; "
                      "every harvest typed at the console is stored with them")
    body = {"group": msg.group - 1, "block": msg.block, "round": msg.round, "source": "console",
            "by": msg.by.strip()}
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
    live.state.group(group - 1)  # 1-based here; the core's one range check


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
