"""Socket events a phone may send: its harvest, and a request for its whole screen again."""

from __future__ import annotations

from ebbtide.game_logic.errors import Refused

from ..console.talk import refuse_during_talk
from ..messages import Empty, HarvestRequest
from ..registry import LiveSession
from ..sockets import (
    Connection,
    _session_just_ended,
    edge,
    send_console,
    send_everyone,
    send_group,
    send_seat_soon,
)


@edge("harvest", HarvestRequest, role="phone")
def on_harvest(conn: Connection, live: LiveSession, msg: HarvestRequest):
    """A seat's harvest: stored (committed) before it is acknowledged."""
    own = (conn.group + 1, conn.seat + 1)
    if (msg.group or own[0], msg.seat or own[1]) != own:
        raise Refused("not_your_seat", f"this phone holds group {own[0]}, seat {own[1]}; "
                      "a phone decides only for its own seat")
    body = {
        "group": conn.group, "seat": conn.seat, "block": msg.block, "round": msg.round,
        "harvest": msg.harvest, "source": conn.agent, "practice": msg.practice,
    }
    if msg.language is not None:
        body["language"] = msg.language
    if msg.pictures is not None:
        body["pictures"] = msg.pictures
    if msg.decision_id not in live.state.receipts:  # no choices while the group talks
        refuse_during_talk(live, conn.group, msg.block, msg.round)
    change = live.submit("harvest_submitted", body, decision_id=msg.decision_id)
    if change.is_new:
        if _session_just_ended(live, change):
            send_everyone(live)
        elif change.resolved:
            send_group(live, conn.group)
        else:
            send_seat_soon(live, conn.group, conn.seat)  # the group's result may say it first
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
