"""A whole live session over real sockets: two groups, both blocks, then the export."""

from __future__ import annotations

import csv
import subprocess
import sys
import warnings

import pandas as pd
import pytest
from conftest import ROOT, connect_console, connect_every_seat, connect_phone, wait_until

from ebbtide.game_logic.rounds import next_block, resolve, start_block
from ebbtide.game_logic.seeding import round_rng

# Harvests per (group, seat) and round, chosen so that group 2 crosses the danger level
# and group 1 does not: invented for this test.
PLAN = {0: [[5, 6], [4, 4], [6, 5], [3, 3], [5, 5]], 1: [[15, 15], [15, 14], [12, 15], [10, 10], [9, 9]]}


def read_csv(path):
    with path.open(encoding="utf-8", newline="") as handle:
        return list(csv.DictReader(handle))


def independent_replay(study, seed):
    """Expected rounds straight from game_logic.resolve (no server code involved)."""
    expected = {}
    for g, rounds in PLAN.items():
        state = start_block(study, seed, g, 0)
        for b in range(len(study.blocks)):
            if b:
                state = next_block(study, seed, state)
            for k, harvests in enumerate(rounds, start=1):
                if state.block_over:
                    break
                state, outcome = resolve(study, state, harvests, round_rng(seed, g, b, k))
                expected[(g, b, k)] = outcome
    return expected


def play_block(phones, block, live):
    for k, per_group in enumerate(zip(*PLAN.values(), strict=True), start=1):
        for g, harvests in enumerate(per_group):
            if live.state.groups[g].state.block_over:
                continue
            for s, h in enumerate(harvests):
                ack = phones[(g, s)].harvest(f"d-{g}-{s}-{block}-{k}", block, k, h)
                assert ack["ok"], ack


@pytest.fixture
def session(start_server, demo_study):
    server = start_server(demo_study)
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    yield server, phones, console
    for phone in phones.values():
        phone.close()
    console.close()


def test_whole_session_export_matches_independent_replay(session, demo_study, tmp_path):
    server, phones, console = session
    assert console.act("console_start")["ok"]
    play_block(phones, 1, server.live)
    groups = server.live.state.groups
    wait_until(lambda: all(p.state.block_over for p in groups), "both groups ending block 1")
    assert console.act("console_open_block", {"group": None})["ok"]
    play_block(phones, 2, server.live)
    wait_until(lambda: server.live.state.status == "ended", "the session to end after the last block")

    out = tmp_path / "export"
    command = [sys.executable, "-m", "ebbtide.server.cli", "export", str(server.db_path), "--out", str(out),
               "--stata"]
    done = subprocess.run(command, cwd=ROOT, capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    rounds, decisions = read_csv(out / "rounds.csv"), read_csv(out / "decisions.csv")
    expected = independent_replay(demo_study, server.seed)
    assert len(rounds) == len(expected)
    for row in rounds:
        outcome = expected[(int(row["group_id"][1:]) - 1, int(row["block"]) - 1, int(row["round"]))]
        assert int(row["stock_before"]) == outcome.stock_before
        assert int(row["stock_after"]) == outcome.stock_after
        assert int(row["total_taken"]) == outcome.total_taken
        assert row["regime_after"] == str(outcome.regime_after)
        assert float(row["threshold"]) == pytest.approx(outcome.threshold, abs=1e-9)
    for row in decisions:
        g, s = int(row["group_id"][1:]) - 1, int(row["seat_id"].split("-")[1]) - 1
        outcome = expected[(g, int(row["block"]) - 1, int(row["round"]))]
        assert int(row["harvest_asked"]) == outcome.asked[s]
        assert int(row["harvest_taken"]) == outcome.taken[s]
        assert row["source"] == "phone"
    assert {row["group_id"] for row in rounds} == {"G01", "G02"}
    crossed = {row["group_id"] for row in rounds if row["crossed"] == "1"}  # flags are written 0/1
    assert crossed == {"G02"}
    # The Frictionless validator accepts the live export too, keys and foreign keys included.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        import frictionless

        report = frictionless.validate(str(out / "datapackage.json"))
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])[:5]
    # The optional Stata copy holds the same rows (read back with pandas).
    stata_rounds = pd.read_stata(out / "rounds.dta")
    assert len(stata_rounds) == len(rounds)
    assert stata_rounds["stock_after"].tolist() == [int(r["stock_after"]) for r in rounds]


def test_phones_never_receive_hidden_values(session):
    server, phones, console = session
    console.act("console_start")
    play_block(phones, 1, server.live)
    wait_until(lambda: all(p.state.block_over for p in server.live.state.groups), "block 1 to end")
    for (g, _s), phone in phones.items():
        wire = phone.wire_text()
        threshold = server.live.state.groups[g].state.threshold
        for forbidden in ("threshold", "flip_draw", "continue_draw", "regime", "seed", "secret", "hidden"):
            assert forbidden not in wire, forbidden
        assert repr(threshold)[:6] not in wire
        assert str(server.seed) not in wire
        # show_others is off in block 1: no seat ever sees another seat's harvest list
        assert '"others"' not in wire


def test_group_rounds_progress_independently(session):
    server, phones, console = session
    console.act("console_start")
    for k in (1, 2, 3):
        phones[(1, 0)].harvest(f"fast-a-{k}", 1, k, 2)
        phones[(1, 1)].harvest(f"fast-b-{k}", 1, k, 2)
    snap = phones[(1, 0)].wait_for(lambda s: s["view"]["round"] == 4, "group 2 in round 4")
    assert snap["view"]["last_round"]["round"] == 3
    assert phones[(0, 0)].latest()["view"]["round"] == 1


def test_resent_decision_is_acknowledged_again_and_counted_once(session):
    server, phones, console = session
    console.act("console_start")
    first = phones[(0, 0)].harvest("same-id-123", 1, 1, 7)
    again = phones[(0, 0)].harvest("same-id-123", 1, 1, 7)
    assert first["ok"] and again["ok"] and again["repeated"] and not first["repeated"]
    kinds = [e.kind for e in server.live.store.events(server.live.session_id)]
    assert kinds.count("harvest_submitted") == 1


@pytest.mark.parametrize(
    ("payload", "code"),
    [
        ({"decision_id": "abcdefgh", "block": 1, "round": 1, "harvest": 16}, "invalid_harvest"),
        ({"decision_id": "abcdefgh", "block": 1, "round": 2, "harvest": 3}, "wrong_round"),
        ({"decision_id": "abcdefgh", "block": 1, "round": 1, "harvest": "3"}, "bad_request"),
        ({"decision_id": "abcdefgh", "block": 1, "round": 1, "harvest": 3, "extra": 1}, "bad_request"),
        ({"decision_id": "x", "block": 1, "round": 1, "harvest": 3}, "bad_request"),
    ],
)
def test_bad_harvest_is_refused_with_a_problem_event_and_changes_nothing(session, payload, code):
    server, phones, console = session
    console.act("console_start")
    before = len(server.live.store.events(server.live.session_id))
    phone = phones[(0, 0)]
    ack = phone.client.call("harvest", payload, timeout=5)
    assert not ack["ok"] and ack["code"] == code and ack["message"]
    wait_until(lambda: any(name == "problem" for name, _ in phone.received), "a problem event")
    assert len(server.live.store.events(server.live.session_id)) == before


def test_harvest_before_start_is_refused_as_not_started(session):
    server, phones, _console = session
    ack = phones[(0, 0)].harvest("early-one", 1, 1, 3)
    assert ack["code"] == "not_started"


def test_reconnecting_phone_gets_a_full_snapshot_with_its_recorded_choice(session):
    server, phones, console = session
    console.act("console_start")
    phones[(0, 1)].harvest("before-drop", 1, 1, 4)
    phones[(0, 1)].close()
    again = connect_phone(server.url, server.key(0, 1).secret, device="device-0-1")
    try:
        snap = again.latest()
        assert snap["decided"] and snap["my_harvest"] == 4
        assert snap["seq"] >= phones[(0, 0)].latest()["seq"]
    finally:
        again.close()


def test_console_close_round_records_the_missing_seat_as_closed_and_tells_its_phone(session):
    server, phones, console = session
    console.act("console_start")
    phones[(0, 0)].harvest("only-one", 1, 1, 6)
    assert console.act("console_close_round", {"group": 1})["ok"]
    outcome = server.live.state.groups[0].outcomes[0]
    assert outcome.asked == (6, 0)
    assert server.live.state.groups[0].sources[0] == ("phone", "closed")
    late = phones[(0, 1)].wait_for(lambda s: "last_round" in s["view"], "the closed round's result")
    assert late["missed_last_round"] is True
    decided = phones[(0, 0)].wait_for(lambda s: "last_round" in s["view"], "the result")
    assert decided["missed_last_round"] is False


def test_console_sees_hidden_threshold_marked_hidden(session):
    server, _phones, console = session
    state = wait_until(lambda: console.states and console.states[-1], "a console state")
    assert state["groups"][0]["hidden"]["threshold"] == server.live.state.groups[0].state.threshold


def test_phone_cannot_send_console_actions(session):
    _server, phones, _console = session
    ack = phones[(0, 0)].client.call("console_start", {}, timeout=5)
    assert ack["code"] == "not_allowed"


def test_unknown_seat_secret_is_refused_at_connect(start_server, demo_study):
    server = start_server(demo_study)
    import socketio

    client = socketio.Client(reconnection=False)
    errors = []
    client.on("connect_error", errors.append)
    with pytest.raises(socketio.exceptions.ConnectionError):
        client.connect(server.url, auth={"secret": "A" * 24, "device": "device-zzzz"},
                       transports=["websocket"], wait_timeout=5)
    assert "seat card does not belong" in errors[0]["message"]
