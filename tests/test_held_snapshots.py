"""A seat's own "recorded" snapshot waits a moment and is dropped when its group's result comes first.

What must hold (the project's own rules, no outside source): a phone whose choice did not
complete the round still receives a snapshot saying it decided; a group deciding together
receives its result, and every phone ends up holding the latest state. Counted with a fake
timer and on a live server, never by timing.
"""

from __future__ import annotations

from conftest import connect_console, connect_every_seat, wait_until

from ebbtide.server.phone.held_snapshots import HOLD_SECONDS, HeldSeatSnapshots


class Harness:
    def __init__(self):
        self.sent: list[tuple[int, list[int]]] = []
        self.due: list[object] = []
        self.held = HeldSeatSnapshots(lambda group, seats: self.sent.append((group, seats)),
                                      lambda delay, fn: self.due.append(fn))

    def run_due(self) -> None:
        due, self.due = self.due, []
        for fn in due:
            fn()


def test_seats_that_decided_get_their_snapshot_after_the_hold():
    h = Harness()
    h.held.decided(0, 2)
    h.held.decided(0, 0)
    h.held.decided(1, 1)
    assert h.sent == [] and len(h.due) == 2  # one wait per group, however many seats decide
    h.run_due()
    assert sorted(h.sent) == [(0, [0, 2]), (1, [1])]


def test_a_group_result_sent_first_replaces_the_held_snapshots():
    h = Harness()
    for seat in range(4):
        h.held.decided(3, seat)
    h.held.group_sent(3)  # the fifth decision resolved the round: all five seats were sent it
    h.run_due()
    assert h.sent == []


def test_a_seat_deciding_after_the_group_was_sent_is_held_again():
    h = Harness()
    h.held.decided(0, 1)
    h.held.group_sent(0)
    h.held.decided(0, 4)  # the next round
    h.run_due()
    h.run_due()
    assert h.sent == [(0, [4])]


def test_live_phone_that_decides_alone_still_hears_it_was_recorded(start_server, demo_study):
    server = start_server(demo_study)
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    try:
        assert console.act("console_start")["ok"]
        phone = phones[(0, 0)]
        wait_until(lambda: phone.snapshots and phone.snapshots[-1]["status"] == "running", "a running round")
        ack = phone.harvest("alone-0001", 1, 1, 3)
        assert ack["ok"]
        snap = phone.wait_for(lambda s: s["decided"], "the recorded snapshot")
        assert snap["my_harvest"] == 3 and snap["seq"] >= ack["seq"]
        assert HOLD_SECONDS < 0.5  # a person sees "recorded" from the acknowledgement meanwhile
        others = [p for key, p in phones.items() if key[0] == 0 and key != (0, 0)]
        for n, other in enumerate(others):
            assert other.harvest(f"rest-000{n}", 1, 1, 1)["ok"]
        for member in [phone, *others]:
            result = member.wait_for(lambda s: s["view"].get("last_round"), "the round's result")
            assert not result["decided"] and result["view"]["round"] == 2
    finally:
        for phone in phones.values():
            phone.close()
        console.close()
