"""Talk pauses: a timed pause for face-to-face discussion before each round of a talk block.

The shell owns the clock: a pause starts when a round of a ``talk`` block is first
shown (the round opens), ends ``talk_seconds`` later, and the console may extend it
(+30 s) or end it. While it runs the server refuses harvests of that round. Phones
get the time left in seconds (never a wall-clock time, so a phone's wrong clock does
not matter) and count down locally; a reload asks again and gets what is left.

Pauses live in memory, not in the log: they change no outcome. A server restart
gives the round being played a fresh pause.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass

from flask import current_app

from ebbtide.game_logic.errors import Refused, UnknownGroup

from ..messages import GroupTarget

EXTEND_SECONDS = 30
# A phone counts down on its own clock; a harvest sent a moment before the
# server's end is still let through, so the phone never sees a refusal for it.
GRACE_SECONDS = 1.0


@dataclass(frozen=True)
class RoundKey:
    """One round of one group: the pause belongs to it, not to the block."""

    session_id: str
    group: int
    block: int
    round: int


class TalkPauses:
    """End times of every talk pause, on a monotonic clock passed in as ``now`` (seconds)."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._ends: dict[RoundKey, float] = {}

    def remaining(self, key: RoundKey, seconds: float, now: float) -> float:
        """Seconds left in the round's pause, starting it (``seconds`` long) on first ask."""
        with self._lock:
            end = self._ends.setdefault(key, now + seconds)
            return max(0.0, end - now)

    def extend(self, key: RoundKey, seconds: float, now: float) -> float:
        """Add ``seconds`` to a running pause; refuse (nothing changes) once it is over."""
        with self._lock:
            end = self._ends.get(key)
            if end is None or end <= now:
                raise Refused(
                    "talk_over",
                    f"the talk pause of group {key.group + 1} is not running; "
                    "only a running pause can be extended",
                )
            self._ends[key] = end + seconds
            return self._ends[key] - now

    def end(self, key: RoundKey, now: float) -> None:
        """End the pause now: harvests are taken from this moment."""
        with self._lock:
            end = self._ends.get(key)
            if end is None or end <= now:
                raise Refused("talk_over", f"the talk pause of group {key.group + 1} is not running")
            self._ends[key] = now


def pauses() -> TalkPauses:
    return current_app.extensions["ebbtide"].talk_pauses  # runtime state lives in the registry


def open_round_key(live, group: int) -> RoundKey | None:
    """The group's open round if it is in a talk block and can be played now, else None."""
    state = live.state
    gs = state.groups[group].state
    if state.status != "running" or not state.round_is_open(group):
        return None
    if not live.study.blocks[gs.block].talk:
        return None
    return RoundKey(live.session_id, group, gs.block + 1, gs.round + 1)


def talk_remaining(live, group: int) -> float | None:
    """Seconds left in the group's talk pause (0 when over), or None outside talk blocks."""
    key = open_round_key(live, group)
    if key is None:
        return None
    seconds = live.study.blocks[key.block - 1].talk_seconds
    return pauses().remaining(key, seconds, time.monotonic())


def refuse_during_talk(live, group: int, block: int, round_number: int) -> None:
    """Refuse a harvest for a round whose talk pause is still running."""
    key = open_round_key(live, group)
    if key is None or (key.block, key.round) != (block, round_number):
        return  # not this round's pause: the usual checks decide
    left = talk_remaining(live, group)
    if left is not None and left > GRACE_SECONDS:
        raise Refused(
            "talking",
            f"the group is still talking: choices open in {int(left + 0.999)} s; "
            "wait until the countdown ends",
        )


def register_console_events(edge, send_group, send_console) -> None:
    """Console events that extend or end a group's talk pause (wired by ``sockets``)."""

    def _key(live, msg: GroupTarget) -> RoundKey:
        if msg.group is None:
            raise UnknownGroup(f"name one group for the talk pause; allowed: 1..{live.study.groups.count}")
        live.state.group(msg.group - 1)
        key = open_round_key(live, msg.group - 1)
        if key is None:
            raise Refused("talk_over", f"group {msg.group} is not in a talk round that can be played now")
        return key

    @edge("console_talk_extend", GroupTarget, role="console")
    def on_talk_extend(conn, live, msg: GroupTarget):
        """Facilitator: give the group 30 seconds more to talk."""
        key = _key(live, msg)
        talk_remaining(live, msg.group - 1)  # a pause nobody has seen yet starts now
        left = pauses().extend(key, EXTEND_SECONDS, time.monotonic())
        send_group(live, msg.group - 1)
        send_console(live)
        return {"ok": True, "remaining": round(left, 1)}

    @edge("console_talk_end", GroupTarget, role="console")
    def on_talk_end(conn, live, msg: GroupTarget):
        """Facilitator: end the group's talk pause now; choices open."""
        key = _key(live, msg)
        talk_remaining(live, msg.group - 1)
        pauses().end(key, time.monotonic())
        send_group(live, msg.group - 1)
        send_console(live)
        return {"ok": True, "remaining": 0}
