"""Thousands of malformed socket events at the production server change nothing but what was valid.

``ebbtide serve`` runs as its own process on gevent's server, as on a field day. A seeded
generator mutates well-formed messages into ones that can never be valid (wrong types,
missing or extra keys, huge strings, out-of-range numbers, rounds not open, other seats,
unknown event names, several arguments) and sends them from phones and from the console,
with a valid round played now and then. Afterwards the database, read with plain sqlite3,
holds exactly the valid events; the console, opened afresh as a facilitator would, shows
the state a replay of those events gives; the rounds equal the core's own resolution of the
valid harvests; the server still serves; and its stderr holds no traceback.
"""

from __future__ import annotations

import json
import sqlite3
import time
from types import SimpleNamespace

import numpy as np
import pytest
import requests
import socketio
from conftest import WAIT_SECONDS, ServeProcess, connect_phone, console_login
from studies import make_study

from ebbtide.game_logic.rounds import resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.session_fold import replay
from ebbtide.server.registry import console_snapshot

pytestmark = pytest.mark.slow

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


SEED, PIN = 5550123, "8642"
# The production flood limits (docs/server.md): 20 messages per phone socket and 60 per console
# socket within 10 s. Each client opens a fresh socket before its budget is spent, so every
# message is judged on its shape, never refused for its rate.
PHONE_BUDGET, CONSOLE_BUDGET = 20, 60


class Rotating:
    """One seat's phone, or the console, whose socket is replaced after ``budget`` messages.

    A socket is only ever replaced on schedule: one that dropped by itself fails the test.
    """

    def __init__(self, connect, budget: int):
        self.connect, self.budget = connect, budget
        self.client, self.sent, self.sockets = connect(), 0, 1

    def call(self, event: str, body) -> dict:
        if self.sent == self.budget:
            assert self.client.connected, "the server dropped a socket it should have kept"
            self.client.disconnect()
            self.client, self.sent, self.sockets = self.connect(), 0, self.sockets + 1
        assert self.client.connected, "the server dropped a socket it should have kept"
        self.sent += 1
        return self.client.call(event, body, timeout=WAIT_SECONDS)

    def close(self) -> None:
        self.client.disconnect()


def console_client(url: str, cookie: str, states: list | None = None) -> socketio.Client:
    client = socketio.Client(reconnection=False)
    if states is not None:
        client.on("console_state", states.append)
    client.connect(url, auth={"role": "console"}, headers={"Cookie": cookie},
                   transports=["websocket"], wait_timeout=WAIT_SECONDS)
    return client


def stored_events(db):
    """The event log read with plain sqlite3 (read-only), not through the project's store."""
    with sqlite3.connect(f"file:{db}?mode=ro", uri=True) as conn:
        (session_id,) = conn.execute("SELECT session_id FROM sessions").fetchone()
        rows = conn.execute("SELECT id, kind, body, decision_id FROM events WHERE session_id = ? ORDER BY id",
                            (session_id,)).fetchall()
    events = [SimpleNamespace(id=i, kind=k, body=json.loads(b), decision_id=d) for i, k, b, d in rows]
    return session_id, events


def subset_mismatches(expected, shown, path="state"):
    """Where ``shown`` differs from ``expected``; ``shown`` may carry more keys (gauges, clocks)."""
    if isinstance(expected, dict):
        if not isinstance(shown, dict):
            return [path]
        return [m for key, value in expected.items()
                for m in (subset_mismatches(value, shown[key], f"{path}.{key}") if key in shown
                          else [f"{path}.{key} missing"])]
    if isinstance(expected, (list, tuple)):
        if not isinstance(shown, list) or len(shown) != len(expected):
            return [path]
        return [m for k, (a, b) in enumerate(zip(expected, shown, strict=True))
                for m in subset_mismatches(a, b, f"{path}[{k}]")]
    return [] if expected == shown else [f"{path}: {expected!r} != {shown!r}"]


@pytest.fixture
def players(tmp_path):
    study = make_study(groups=2, seats=2, initial=80, max_harvest=CAP, rounds=100)
    study_path = tmp_path / "fuzz-study.toml"
    study_path.write_text(study.source_text, encoding="utf-8")
    db = tmp_path / "fuzz.db"
    server = ServeProcess("serve", str(study_path), "--db", str(db), "--seed", str(SEED), "--pin", PIN)
    clients = []
    try:
        assert server.served_by() == "gevent"  # the production server, not Werkzeug's threads
        with sqlite3.connect(f"file:{db}?mode=ro", uri=True) as conn:
            keys = [SimpleNamespace(group=g, seat=s, secret=secret, short_code=code) for g, s, secret, code in
                    conn.execute("SELECT group_index, seat_index, secret, short_code FROM seat_keys")]
        secrets = {(k.group, k.seat): k.secret for k in keys}
        with console_login(server.url, PIN) as http:
            cookie = "; ".join(f"{k}={v}" for k, v in http.cookies.items())

        def phone_socket(seat):
            device = f"device-{seat[0]}-{seat[1]}"
            return lambda: connect_phone(server.url, secrets[seat], device=device).client

        phones = {seat: Rotating(phone_socket(seat), PHONE_BUDGET) for seat in sorted(secrets)}
        console = Rotating(lambda: console_client(server.url, cookie), CONSOLE_BUDGET)
        clients = [*phones.values(), console]
        yield SimpleNamespace(study=study, server=server, db=db, cookie=cookie, keys=keys, secrets=secrets,
                              phones=phones, console=console)
    finally:
        for client in clients:
            client.close()
        server.kill()
    server.assert_no_traceback()


def test_malformed_events_are_refused_and_the_log_holds_exactly_the_valid_ones(players):
    study, server, phones, console = players.study, players.server, players.phones, players.console
    began = time.monotonic()
    rng = np.random.default_rng(424242)
    assert console.call("console_start", {})["ok"]
    valid_ids, played = [], []
    open_round = 1
    refusal_codes: dict[str, int] = {}
    for i in range(MALFORMED):
        if i % VALID_EVERY == 0:
            harvests = [int(h) for h in rng.integers(0, 4, size=2)]
            for seat, harvest in enumerate(harvests):
                decision_id = f"valid-{open_round:04d}-{seat}"
                ack = phones[(0, seat)].call("harvest", {"decision_id": decision_id, "block": 1,
                                                         "round": open_round, "harvest": harvest})
                assert ack["ok"] and not ack["repeated"], ack
                valid_ids.append(decision_id)
            played.append(harvests)
            open_round += 1
        roll = rng.random()
        if roll < 0.6:
            client = phones[(0, int(rng.integers(2)))]
            event, body = "harvest", malformed_harvest(rng, i, open_round)
        elif roll < 0.75:
            client = phones[(1, 0)]
            event = str(rng.choice(["", "harvest ", "HARVEST", "console_start", "console_enter", "snapshot",
                                    "problem", "x" * 500, "connect_error", "ünknown"]))
            body = malformed_harvest(rng, i, 1)
        elif roll < 0.8:
            client, event, body = phones[(1, 1)], "harvest", (1, 2)  # two arguments
        else:
            client = console
            event, body = malformed_console(rng, i, open_round)
        ack = client.call(event, body)
        assert ack["ok"] is False and ack["code"] and ack["message"], (event, body, ack)
        refusal_codes[ack["code"]] = refusal_codes.get(ack["code"], 0) + 1
    # Each class of damage is refused for its own reason, not by one blanket answer, and none for
    # its rate: a flood refusal would say nothing about the message's shape.
    assert {"bad_request", "unknown_event", "not_allowed"} <= set(refusal_codes), refusal_codes
    assert "too_many" not in refusal_codes, refusal_codes
    fuzzed = time.monotonic() - began

    session_id, events = stored_events(players.db)
    logged_ids = [e.decision_id for e in events if e.kind == "harvest_submitted"]
    assert logged_ids == valid_ids
    kinds = {e.kind for e in events}
    assert kinds == {"session_created", "session_started", "seat_claimed", "harvest_submitted",
                     "round_resolved"}
    assert sum(e.kind == "seat_claimed" for e in events) == 4  # one per seat: a new socket is no new claim

    # The live state, read the way the facilitator reads it: a console opened now.
    states: list[dict] = []
    viewer = console_client(server.url, players.cookie, states)
    try:
        shown = wait_until_state(states, events[-1].id)
    finally:
        viewer.disconnect()
    rebuilt = replay(study, SEED, session_id, events)
    online = {(g["group"] - 1, s["seat"] - 1): s["online"] for g in shown["groups"] for s in g["seats"]}
    assert subset_mismatches(console_snapshot(rebuilt, players.keys, online), shown) == []

    # Independent check straight from the core: the valid harvests alone give the same rounds.
    state = start_block(study, SEED, 0, 0)
    expected = []
    for k, harvests in enumerate(played, start=1):
        state, outcome = resolve(study, state, harvests, round_rng(SEED, 0, 0, k))
        expected.append(outcome)
    assert [(r["round"], r["asked"], r["taken"], r["stock_after"]) for r in shown["groups"][0]["rounds"]] == [
        (o.round, list(o.asked), list(o.taken), o.stock_after) for o in expected]
    assert shown["groups"][1]["rounds"] == []

    # Still healthy and serving: the probe answers, a phone opened now sees the last result,
    # and one more round is acknowledged and resolved as the core resolves it.
    assert requests.get(f"{server.url}/healthz", timeout=5).json()["ok"]
    watcher = connect_phone(server.url, players.secrets[(0, 0)], device="device-0-0")
    try:
        last = watcher.latest()["view"]["last_round"]
        assert (last["round"], last["taken"], last["stock_after"]) == (
            expected[-1].round, expected[-1].taken[0], expected[-1].stock_after)
        for seat, harvest in enumerate((2, 1)):
            ack = phones[(0, seat)].call("harvest", {"decision_id": f"after-fuzz-{seat}", "block": 1,
                                                     "round": open_round, "harvest": harvest})
            assert ack["ok"] and not ack["repeated"], ack
        _, outcome = resolve(study, state, [2, 1], round_rng(SEED, 0, 0, open_round))
        after = watcher.wait_for(lambda s: (s["view"].get("last_round") or {}).get("round") == open_round,
                                 "the round played after the fuzz")["view"]["last_round"]
        assert (after["taken"], after["stock_after"]) == (outcome.taken[0], outcome.stock_after)
    finally:
        watcher.close()
    server.assert_no_traceback()
    sockets = sum(c.sockets for c in (*phones.values(), console))
    print(f"fuzz: {MALFORMED} malformed events over {sockets} sockets in {fuzzed:.1f} s; "
          f"refusals {refusal_codes}")


def wait_until_state(states: list[dict], seq: int) -> dict:
    """The console's state once it shows the log up to event ``seq`` (bounded wait)."""
    deadline = time.monotonic() + WAIT_SECONDS
    while time.monotonic() < deadline:
        if states and states[-1]["seq"] >= seq:
            return states[-1]
        time.sleep(0.02)
    raise AssertionError(f"the console never showed event {seq}: {[s['seq'] for s in states]}")
