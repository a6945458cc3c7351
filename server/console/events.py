"""Socket events of the console: start, pause, resume and end; close a round; open a block; talk."""

from __future__ import annotations

from collections.abc import Callable

from ebbtide.game_logic.errors import Refused

from ..messages import Empty, GroupTarget
from ..registry import LiveSession
from ..sockets import Connection, edge, send_console, send_everyone, send_group
from .talk import register_console_events


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
    live.state.group(target.group - 1)
    return [target.group - 1]


@edge("console_close_round", GroupTarget, role="console")
def on_close_round(conn: Connection, live: LiveSession, msg: GroupTarget):
    """Facilitator: resolve the open round now; seats that have not decided take 0."""

    for g in _groups(live, msg, live.state.round_is_open):
        state = live.state.groups[g].playing  # the practice stock while the group practises
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



# The console extends or ends a group's talk pause (console/talk.py).
register_console_events(edge, send_group, send_console)
