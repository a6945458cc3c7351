"""Console refreshes are coalesced: a burst of decisions is a few console states, none lost.

The requirement (at most a few console states a second per session, every decision on the
console within a second) is the project's own target for large sessions; common practice
for live dashboards, no source. Counted with a fake clock, and by counting real emits on a
live server, never by timing.
"""

from __future__ import annotations

import math
import time
from concurrent.futures import ThreadPoolExecutor

from conftest import connect_console, connect_every_seat, study_with, wait_until

from ebbtide.server.console.refresh import REFRESH_INTERVAL_SECONDS, CoalescedRefresh


class FakeClock:
    def __init__(self):
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


class Harness:
    """A refresh whose deferred sends are queued (with their due time) until the test runs them."""

    def __init__(self, interval: float = 0.25):
        self.clock = FakeClock()
        self.sent_at: list[float] = []
        self.pending: list[tuple[float, object]] = []
        self.refresh = CoalescedRefresh(lambda: self.sent_at.append(self.clock.now),
                                        lambda delay, fn: self.pending.append((self.clock.now + delay, fn)),
                                        clock=self.clock, interval=interval)

    def advance(self, seconds: float) -> None:
        """Move the clock, running every deferred send that falls due on the way."""
        target = self.clock.now + seconds
        while self.pending and min(due for due, _ in self.pending) <= target:
            self.pending.sort(key=lambda item: item[0])
            due, fn = self.pending.pop(0)
            self.clock.now = due
            fn()
        self.clock.now = target


def test_refresh_burst_of_a_thousand_changes_sends_two_states():
    h = Harness()
    for _ in range(1000):
        h.refresh.request()
    assert h.sent_at == [100.0]  # the first change goes out at once
    assert len(h.pending) == 1  # the other 999 wait for one deferred send
    h.advance(1.0)
    assert h.sent_at == [100.0, 100.25]


def test_refresh_last_change_is_never_dropped_and_is_sent_within_the_interval():
    h = Harness()
    h.refresh.request()
    h.advance(0.1)
    h.refresh.request()  # changed after the first state was sent
    assert len(h.sent_at) == 1
    h.advance(0.2)
    assert len(h.sent_at) == 2 and h.sent_at[1] - 100.1 <= 0.25


def test_refresh_rate_is_bounded_whatever_the_request_rate():
    h = Harness()
    for _ in range(10_000):  # 1,000 changes a second for 10 s
        h.refresh.request()
        h.advance(0.001)
    assert len(h.sent_at) <= math.ceil(10 / 0.25) + 1
    gaps = [b - a for a, b in zip(h.sent_at, h.sent_at[1:], strict=False)]
    assert min(gaps) >= 0.25 - 1e-9


def test_refresh_after_a_quiet_spell_is_sent_at_once():
    h = Harness()
    h.refresh.request()
    h.advance(5)
    h.refresh.request()
    assert h.sent_at == [100.0, 105.0] and not h.pending


def test_live_burst_of_decisions_reaches_the_console_as_few_states(start_server):
    groups = 10  # of 2 seats: 20 phones deciding at once
    server = start_server(study_with(**{"count = 2": f"count = {groups}"}))
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    try:
        assert console.act("console_start")["ok"]
        wait_until(lambda: console.states and console.states[-1]["status"] == "running", "a running console")
        time.sleep(REFRESH_INTERVAL_SECONDS * 2)  # let the start's refresh go out
        before = len(console.states)
        began = time.monotonic()
        with ThreadPoolExecutor(max_workers=len(phones)) as pool:
            acks = list(pool.map(lambda key: phones[key].harvest(f"burst-{key[0]}-{key[1]}", 1, 1, 1),
                                 phones))
        assert all(ack["ok"] for ack in acks)

        def every_round_shown():
            last = console.states[-1]
            return all(g["rounds"] and g["rounds"][-1]["round"] == 1 for g in last["groups"]) and last

        wait_until(every_round_shown, "the console to show every group's first round")
        elapsed = time.monotonic() - began
        # Connects and disconnects also refresh, but none happen here; one state at most per
        # interval, plus the immediate first one.
        sent = len(console.states) - before
        assert sent <= math.ceil(elapsed / REFRESH_INTERVAL_SECONDS) + 1
    finally:
        for phone in phones.values():
            phone.close()
        console.close()
