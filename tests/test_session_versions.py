"""Readers always see a whole version of a session (copy-on-write), never one half-way through a change.

The reference for "whole" is the stored log itself: a version with sequence number
``seq`` must equal the fold of exactly the stored events up to ``seq``.
"""

from __future__ import annotations

import threading
import time

from conftest import DEMO, connect_console

from ebbtide.game_logic.session_fold import SessionState, replay
from ebbtide.game_logic.study import load_study

STUDY = load_study(DEMO)


def digest(state: SessionState):
    """Everything a reader can see in a version, as plain values."""
    return (
        state.status, state.seq, state.debrief_revealed,
        tuple((tuple(sorted(p.pending.items())), tuple(p.units), tuple(p.outcomes), p.state,
               p.waiting, p.paused) for p in state.groups),
        tuple(sorted((k, tuple(v)) for k, v in state.devices.items())),
        tuple(sorted(state.released)), tuple(sorted(state.receipts.items())),
    )


def harvest(group: int, seat: int, round_number: int, units: int) -> dict:
    return {"group": group, "seat": seat, "block": 1, "round": round_number, "harvest": units,
            "source": "phone"}


def test_folding_into_a_fork_leaves_the_version_it_came_from_untouched():
    version = SessionState.new(STUDY, 11, "fork")
    version.apply("session_started", {}, None, 1)
    version.apply("seat_claimed", {"group": 0, "seat": 0, "device": "phone-a"}, None, 2)
    before = digest(version)

    draft = version.fork()
    draft.apply("seat_claimed", {"group": 0, "seat": 0, "device": "phone-b"}, None, 3)
    draft.apply("seat_released", {"group": 1, "seat": 1}, None, 4)
    draft.apply("harvest_submitted", harvest(0, 0, 1, 4), "a", 5)
    resolved = draft.apply("harvest_submitted", harvest(0, 1, 1, 6), "b", 6)

    assert len(resolved) == 1 and draft.groups[0].outcomes  # the draft moved on
    assert digest(version) == before  # the published version did not


def test_concurrent_readers_only_ever_see_versions_that_match_a_prefix_of_the_log(start_server, demo_study):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    console.act("console_start")
    console.close()
    live = server.live
    seen: list[tuple[SessionState, tuple]] = []
    done = threading.Event()

    def read() -> None:
        last = None
        while not done.is_set():
            time.sleep(0.0005)
            version = live.state  # no lock: the published version
            if version is not last:
                seen.append((version, digest(version)))
                last = version

    def write() -> None:
        try:
            for round_number in range(1, STUDY.blocks[0].rounds + 1):
                for group in range(STUDY.groups.count):
                    for seat in range(STUDY.seats):
                        live.submit("harvest_submitted", harvest(group, seat, round_number, 1 + seat),
                                    f"v-{group}-{seat}-{round_number}")
        finally:
            done.set()

    readers = [threading.Thread(target=read) for _ in range(2)]
    for thread in readers:
        thread.start()
    write()
    for thread in readers:
        thread.join(timeout=30)

    events = live.store.events(live.session_id)
    assert len(seen) > 1
    for version, at_read in seen:
        # Unchanged since it was read, and equal to the fold of the log up to its seq.
        assert digest(version) == at_read
        prefix = [e for e in events if e.id <= version.seq]
        assert digest(replay(STUDY, live.record.seed, live.session_id, prefix)) == at_read
    assert live.state.groups[0].state.block_over  # the whole block was played
