"""Rehearsal bots play a whole live session through the real sockets."""

from __future__ import annotations

import threading

import numpy as np
import pytest
import requests
import socketio
from conftest import ROOT, WAIT_SECONDS, connect_console, connect_phone, wait_until
from studies import make_study

from ebbtide.game_logic.behaviour import choose_from_view, make_model
from ebbtide.game_logic.study import load_study
from ebbtide.server.console.access import rehearsal_token
from ebbtide.server.rehearsal import rehearse

VIEW = {"block": 1, "round": 2, "seat": 1, "stock": 70, "danger": {"kind": "none"}}


def test_bot_choices_follow_the_named_model_and_its_noise():
    study = make_study(seats=3, max_harvest=10, rounds=10)
    assert choose_from_view(make_model("max", study), study, VIEW, 0, 0) == 10
    # Equal share of the sustainable yield: MSY r K / 4 = 12.5 (Schaefer 1954), floor(12.5 / 3) = 4.
    assert choose_from_view(make_model("sustainable", study), study, VIEW, 0, 0) == 4
    after = dict(VIEW, last_round={"group_total": 17, "taken": 5})
    # Others took (17 - 5) / 2 = 6 on average; each group has its own draws (noise sd 2 here).
    model = make_model("conditional", study, {"noise": 2.0})
    picks = [choose_from_view(model, study, after, 0, g) for g in range(300)]
    assert 5.6 < np.mean(picks) < 6.4 and 1.5 < np.std(picks) < 2.5


def test_bots_play_every_round_of_a_live_session(start_server, demo_study):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    result = {}
    bots = threading.Thread(
        target=lambda: result.update(r=rehearse(
            server.url, demo_study, server.keys, server.live.record.secret_key, strategy="sustainable",
            seed=3, think_seconds=(0.0, 0.05), max_seconds=60,
        )),
        daemon=True,
    )
    try:
        assert console.act("console_start")["ok"]
        bots.start()
        live = server.live
        wait_until(lambda: all(g.waiting for g in live.state.groups), "every group to end block 1")
        assert console.act("console_open_block", {})["ok"]
        bots.join(timeout=60)
    finally:
        console.close()
    rehearsal = result["r"]
    assert rehearsal.finished
    # 2 groups x 2 seats x 10 rounds, each acknowledged exactly once.
    assert rehearsal.acknowledged == 40
    rows = [s for o, sources in live.state.outcomes() for s in sources]
    assert len(rows) == 40 and set(rows) == {"bot"}
    assert all(o.regime_after == "good" for o, _ in live.state.outcomes())


def test_bots_go_through_the_whole_field_day(start_server):
    study = load_study(ROOT / "examples" / "saltmarsh-day")
    server = start_server(study)
    console = connect_console(server.url, server.pin)
    result = {}
    bots = threading.Thread(
        target=lambda: result.update(r=rehearse(server.url, study, server.keys, server.live.record.secret_key,
                                                strategy="sustainable",
                                                seed=3, think_seconds=(0.0, 0.02), max_seconds=90)),
        daemon=True,
    )
    live = server.live
    seats = [(g, s) for g in range(2) for s in range(3)]
    try:
        bots.start()
        wait_until(lambda: all(live.state.seat_stage(g, s) == "game" for g, s in seats), "every bot ready")
        assert console.act("console_start")["ok"]
        for what in ("practice", "block 1"):  # then blocks 2 opens after block 1
            wait_until(lambda: all(g.waiting for g in live.state.groups), f"every group to end {what}")
            assert console.act("console_open_block", {})["ok"]
        bots.join(timeout=90)
    finally:
        console.close()
    assert result["r"].finished
    # 2 groups x 3 seats x 8 paid rounds; 1 practice round each; every seat reached the end.
    assert sum(len(g.outcomes) for g in live.state.groups) == 16
    assert all(len(g.practice_outcomes) == 1 for g in live.state.groups)
    assert all(live.state.seat_stage(g, s) == "end" for g, s in seats)
    # The bots tried the question's choices in order: a wrong first try, then the right one.
    assert all([right for _, right, _ in live.state.day.seats[k].attempts["what-grows"]] == [False, True]
               for k in seats)


def test_a_phone_cannot_call_itself_a_bot(start_server, demo_study):
    server = start_server(demo_study)
    key = server.keys[0]
    stolen_looking = "0" * 40  # the right shape, not the session's credential
    for auth in ({"agent": "bot"}, {"agent": "bot", "rehearsal": stolen_looking}):
        client = socketio.Client(reconnection=False)
        errors = []
        client.on("connect_error", errors.append)
        with pytest.raises(socketio.exceptions.ConnectionError):
            client.connect(server.url, auth={"secret": key.secret, "device": "phone-device-1", **auth},
                           transports=["websocket"], wait_timeout=WAIT_SECONDS)
        assert errors and "rehearsal" in errors[0]["message"]
    kinds = [e.kind for e in server.live.store.events(server.live.session_id)]
    assert "seat_claimed" not in kinds  # refused before the seat is claimed
    # The credential is not derivable from anything a phone receives: the page and the snapshot.
    token = rehearsal_token(server.live.record.secret_key)
    phone = connect_phone(server.url, key.secret, device="phone-device-1")
    try:
        page = requests.get(f"{server.url}/s/{key.secret}", timeout=5).text
        assert token not in phone.wire_text() and token not in page
        assert phone.latest()["status"] == "setup"
    finally:
        phone.close()
    bot = connect_phone(server.url, key.secret, device="bot-device-1", agent="bot", rehearsal=token)
    bot.close()
