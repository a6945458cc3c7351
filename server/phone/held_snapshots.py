"""A deciding seat's own snapshot, held back a moment in case its group's result replaces it.

When a harvest does not complete its group's round, the deciding seat's phones are sent a
snapshot that says "recorded" and nothing else new. When the whole group decides at once
(after a talk countdown, say), four of those are followed within milliseconds by the round's
result for all five seats, which says more; sending both made a round of five decisions
nine snapshots instead of five, and snapshots are most of a decision's cost (each is built
through the information gate and carries the gauge; docs/performance.md). So such a
snapshot waits ``HOLD_SECONDS``; if the group's result goes out first, it is dropped. The
phone shows "recorded" from its acknowledgement meanwhile (static/phone.js), and a snapshot
always describes the state when it is sent, so a late one can only repeat the latest news.
"""

from __future__ import annotations

import threading
from collections.abc import Callable

HOLD_SECONDS = 0.05  # below what a person notices; enough for a group deciding together


class HeldSeatSnapshots:
    """Per group: seats that decided and still wait for their own snapshot.

    ``send(group, seats)`` sends those seats their snapshot now; ``later(delay, fn)`` must
    run ``fn`` after ``delay`` seconds (a background task in the server; a fake in tests).
    """

    def __init__(self, send: Callable[[int, list[int]], None],
                 later: Callable[[float, Callable[[], None]], None], hold: float = HOLD_SECONDS):
        self._send = send
        self._later = later
        self._hold = hold
        self._lock = threading.Lock()
        self._waiting: dict[int, set[int]] = {}

    def decided(self, group: int, seat: int) -> None:
        """A seat of ``group`` decided and the round is still open: its snapshot goes out soon."""
        with self._lock:
            seats = self._waiting.get(group)
            first = seats is None
            if first:
                seats = self._waiting[group] = set()
            seats.add(seat)
        if first:
            self._later(self._hold, lambda: self._release(group))

    def group_sent(self, group: int) -> None:
        """Every seat of ``group`` was just sent a snapshot: what was held is said already."""
        with self._lock:
            self._waiting.pop(group, None)

    def _release(self, group: int) -> None:
        with self._lock:
            seats = self._waiting.pop(group, None)
        if seats:
            self._send(group, sorted(seats))


def held_for(app, session_id: str, send_now: Callable) -> HeldSeatSnapshots:
    """The held seat snapshots of one session of ``app`` (made on first use).

    ``send_now(live, group, seats)`` runs in an app context, on a background task.
    """
    from ..console.refresh import run_later

    holders = app.extensions.setdefault("ebbtide_held_snapshots", {})
    found = holders.get(session_id)
    if found is not None:
        return found
    app = app._get_current_object() if hasattr(app, "_get_current_object") else app

    def send(group: int, seats: list[int]) -> None:
        with app.app_context():
            registry = app.extensions["ebbtide"]
            if registry.current_id == session_id and not registry.store.closed:
                send_now(registry.current, group, seats)

    return holders.setdefault(session_id, HeldSeatSnapshots(send, run_later))
