"""Readers always see a whole version of a session (copy-on-write), never one half-way through a change.

The reference for "whole" is the stored log itself: a version with sequence number
``seq`` must equal the fold of exactly the stored events up to ``seq``.
"""

from __future__ import annotations

import copy
import threading
import time

import numpy as np
from conftest import DEMO, connect_console
from test_field_day import DAY

from ebbtide.game_logic.errors import Refused
from ebbtide.game_logic.field_day import text_sha256
from ebbtide.game_logic.session_fold import SessionState, replay
from ebbtide.game_logic.study import load_study, parse_study

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


def random_request(rng, state: SessionState) -> tuple[str, dict, str | None]:
    """One candidate event for the field-day study below; many are refused, which is fine."""
    study = state.study
    g, s = int(rng.integers(study.groups.count)), int(rng.integers(study.seats))
    kind = str(rng.choice(["consent", "step", "led", "question", "harvest", "harvest", "harvest",
                           "correct", "close", "open", "pause", "claim", "release", "survey",
                           "risk", "start"]))
    playing = state.groups[g].playing
    where = {"group": g, "block": playing.block + 1, "round": playing.round + 1}
    practice = state.groups[g].practice is not None
    if kind == "consent":
        language = str(rng.choice(["en", "fr"]))
        return "consent_answered", {"group": g, "seat": s, "agree": bool(rng.random() < 0.85),
                                    "language": language,
                                    "text_sha256": text_sha256(study.consent.text[language])}, None
    if kind == "step":
        return "instruction_step", {"group": g, "seat": s, "step": int(rng.integers(2))}, None
    if kind == "led":
        return "instructions_led", {"group": g, "step": int(rng.integers(2))}, None
    if kind == "question":
        return "comprehension_answered", {"group": g, "seat": s, "question": "q1",
                                          "choice": int(rng.integers(1, 3))}, None
    if kind == "harvest":
        decision = f"d-{rng.integers(10**9)}"
        return "harvest_submitted", {**where, "seat": s, "harvest": int(rng.integers(0, 4)),
                                     "source": str(rng.choice(["phone", "console"])),
                                     "practice": practice}, decision
    if kind == "correct":
        pending = state.groups[g].pending.get(s)
        supersedes = pending.event_id if pending else 1
        return "harvest_corrected", {**where, "seat": s, "harvest": int(rng.integers(0, 4)),
                                     "supersedes": supersedes}, f"c-{rng.integers(10**9)}"
    if kind == "close":
        return "round_closed", where, None
    if kind == "open":
        return "block_opened", {"group": g}, None
    if kind == "pause":
        return str(rng.choice(["group_paused", "group_resumed"])), {"group": g}, None
    if kind == "claim":
        return "seat_claimed", {"group": g, "seat": s, "device": f"dev-{rng.integers(3)}"}, None
    if kind == "release":
        return "seat_released", {"group": g, "seat": s}, None
    if kind == "survey":
        return "survey_answered", {"group": g, "seat": s, "questionnaire": "after", "item": "years",
                                   "answer": str(rng.integers(0, 80))}, None
    if kind == "risk":
        return "risk_chosen", {"group": g, "seat": s, "gamble": int(rng.integers(1, 4))}, None
    return "session_started", {}, None


def test_every_version_of_a_chain_stays_as_published_and_equals_the_fold_of_its_prefix():
    # Copy-on-write shares what a fork has not changed with the versions before it; the
    # reference for "unchanged" is a deep copy taken when each version was published, and
    # for "right" the fold of the same events into one fresh state that is never forked.
    study = parse_study(DAY.format(on_decline="absent", practice=1).replace("count = 1", "count = 3"))
    rng = np.random.default_rng(20261202)
    version = SessionState.new(study, 5, "chain")
    published: list[tuple[SessionState, SessionState]] = []
    log: list[tuple[str, dict, str | None, int]] = []
    for _ in range(3000):
        kind, body, decision_id = random_request(rng, version)
        try:
            version.check(kind, body)
        except Refused:
            continue
        draft = version.fork()
        seq = version.seq + 1
        draft.apply(kind, body, decision_id, seq)
        log.append((kind, body, decision_id, seq))
        published.append((draft, copy.deepcopy(draft)))
        version = draft
    kinds = {kind for kind, *_ in log}
    assert {"harvest_submitted", "consent_answered", "block_opened", "seat_released"} <= kinds
    assert any(p.outcomes for p in version.groups)  # rounds were played, not only refused
    fresh = SessionState.new(study, 5, "chain")
    for (kind, body, decision_id, seq), (later, at_publication) in zip(log, published, strict=True):
        fresh.apply(kind, body, decision_id, seq)
        assert later == at_publication
        assert later == fresh
