"""Thousands of malformed socket events at a live server change nothing but what was valid.

A seeded generator mutates well-formed messages into ones that can never be valid
(wrong types, missing or extra keys, huge strings, out-of-range numbers, rounds not
open, other seats, unknown event names, several arguments) and sends them from a
phone and from the console, with a valid round played now and then. Afterwards the
log holds exactly the valid events and the live state equals a replay of the log.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import WAIT_SECONDS, connect_console, connect_every_seat
from studies import make_study

from ebbtide.game_logic.rounds import resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.session_fold import replay
from ebbtide.server.registry import console_snapshot

MALFORMED = 3000
VALID_EVERY = 100  # one valid round of group 1 after this many malformed events
CAP = 10


def _weird_value(rng):
    choices = ["3", 3.0, 2.5, None, True, [], [1], {}, {"a": 1}, "x" * int(rng.integers(1, 9000)), -1,
               2**70, "", "\u0000\u202e", b"\x00\xff"]
    return choices[int(rng.integers(len(choices)))]


def malformed_harvest(rng, i, open_round):
    """A phone's harvest message that no state of the session accepts."""
    base = {"decision_id": f"fuzz-{i:06d}", "block": 1, "round": open_round, "harvest": 3}
    kind = int(rng.integers(9))
    if kind == 0:
        return _weird_value(rng)  # not a message object at all
    if kind == 1:
        base.pop(list(base)[int(rng.integers(4))])
    elif kind == 2:
        base[str(rng.choice(["extra", "group_id", "seat_secret", "__proto__", "source", "z" * 300]))] = 1
    elif kind == 3:
        base[list(base)[int(rng.integers(4))]] = _weird_value(rng)
    elif kind == 4:
        base["harvest"] = int(rng.choice([-1, -(10**6), CAP + 1, 999, 1000, 1001, 2**40]))
    elif kind == 5:
        base["decision_id"] = str(rng.choice(["short", "x" * 65, "../../etc", "id with spaces",
                                              "ünïcödé-id-1", "a" * 5000]))
    elif kind == 6:
        past = [open_round - k for k in (1, 2) if open_round - k >= 1]
        base["round"] = int(rng.choice(past + [open_round + 1, open_round + 50, 0, 10**6]))
    elif kind == 7:
        base["block"] = int(rng.choice([0, 2, 3, 10**6]))
    else:
        base.update({"group": int(rng.choice([2, 3, 100])), "seat": int(rng.integers(1, 3))})
    return base


def malformed_console(rng, i, open_round):
    """A console action that is refused whatever the session's state."""
    options = [
        ("console_enter", {"decision_id": f"cfuzz-{i:06d}", "group": 1, "seat": 3, "block": 1,
                           "round": open_round, "harvest": 1}),
        ("console_enter", {"decision_id": f"cfuzz-{i:06d}", "group": 1, "seat": 1, "block": 1,
                           "round": open_round, "harvest": CAP + 1}),
        ("console_enter", {"decision_id": f"cfuzz-{i:06d}", "group": 9, "seat": 1, "block": 1,
                           "round": open_round, "harvest": 1}),
        ("console_correct", {"decision_id": f"cfuzz-{i:06d}", "group": 1, "seat": 1, "block": 1,
                             "round": open_round, "harvest": 1, "supersedes": 10**9}),
        ("console_slips", {"batch_id": f"cfuzz-{i:06d}", "group": 2, "block": 1, "round": open_round,
                           "harvests": [1, 2, 3]}),
        ("console_slips", {"batch_id": f"cfuzz-{i:06d}", "group": 2, "block": 1, "round": open_round,
                           "harvests": [None, None]}),
        ("console_release_seat", {"group": 1, "seat": 7}),
        ("console_close_round", {"group": 50}),
        ("console_open_block", {"group": 1}),
        ("console_start", {}),
        ("console_resume", {}),
        ("console_resume_group", {"group": 2}),
        ("console_pause_group", {"group": 1, "by": "<script>"}),
        ("console_end", {"unexpected": True}),
    ]
    event, body = options[int(rng.integers(len(options)))]
    if rng.random() < 0.3:
        body = dict(body, **{"extra_key": _weird_value(rng)})
    return event, body


@pytest.fixture
def players(start_server):
    study = make_study(groups=2, seats=2, initial=80, max_harvest=CAP, rounds=100)
    server = start_server(study, seed=5550123)
    server.app.config["EBBTIDE_FLOOD_EVENTS"] = 10**6  # this test is about shapes, not rates
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    yield study, server, phones, console
    for phone in phones.values():
        phone.close()
    console.close()


def test_malformed_events_are_refused_and_the_log_holds_exactly_the_valid_ones(players):
    study, server, phones, console = players
    rng = np.random.default_rng(424242)
    assert console.act("console_start")["ok"]
    valid_ids, played = [], []
    open_round = 1
    refusal_codes: dict[str, int] = {}
    for i in range(MALFORMED):
        if i % VALID_EVERY == 0:
            harvests = [int(h) for h in rng.integers(0, 4, size=2)]
            for seat, harvest in enumerate(harvests):
                decision_id = f"valid-{open_round:04d}-{seat}"
                ack = phones[(0, seat)].harvest(decision_id, 1, open_round, harvest)
                assert ack["ok"] and not ack["repeated"], ack
                valid_ids.append(decision_id)
            played.append(harvests)
            open_round += 1
        roll = rng.random()
        if roll < 0.6:
            client, event, body = phones[(0, int(rng.integers(2)))].client, "harvest", \
                malformed_harvest(rng, i, open_round)
        elif roll < 0.75:
            client = phones[(1, 0)].client
            event = str(rng.choice(["", "harvest ", "HARVEST", "console_start", "console_enter", "snapshot",
                                    "problem", "x" * 500, "connect_error", "ünknown"]))
            body = malformed_harvest(rng, i, 1)
        elif roll < 0.8:
            client, event, body = phones[(1, 1)].client, "harvest", (1, 2)  # two arguments
        else:
            client = console.client
            event, body = malformed_console(rng, i, open_round)
        ack = client.call(event, body, timeout=WAIT_SECONDS)
        assert ack["ok"] is False and ack["code"] and ack["message"], (event, body, ack)
        refusal_codes[ack["code"]] = refusal_codes.get(ack["code"], 0) + 1
    # Each class of damage is refused for its own reason, not by one blanket answer.
    assert {"bad_request", "unknown_event", "not_allowed"} <= set(refusal_codes), refusal_codes

    live = server.live
    events = live.store.events(live.session_id)
    logged_ids = [e.decision_id for e in events if e.kind == "harvest_submitted"]
    assert logged_ids == valid_ids
    kinds = {e.kind for e in events}
    assert kinds == {"session_created", "session_started", "seat_claimed", "harvest_submitted",
                     "round_resolved"}
    rebuilt = replay(study, live.record.seed, live.session_id, events)
    assert console_snapshot(rebuilt, live.keys, {}) == console_snapshot(live.state, live.keys, {})
    # Independent check straight from the core: the valid harvests alone give the same rounds.
    state = start_block(study, live.record.seed, 0, 0)
    for k, harvests in enumerate(played, start=1):
        state, outcome = resolve(study, state, harvests, round_rng(live.record.seed, 0, 0, k))
        assert live.state.groups[0].outcomes[k - 1] == outcome
    assert live.state.groups[1].outcomes == []
