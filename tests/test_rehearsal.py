"""Rehearsal bots play a whole live session through the real sockets."""

from __future__ import annotations

import threading

import numpy as np
from conftest import ROOT, connect_console, wait_until

from ebbtide.game_logic.strategies import choose_from_view
from ebbtide.game_logic.study import load_study
from ebbtide.server.rehearsal import rehearse

VIEW = {"max_harvest": 10, "seats": 3}


def test_bot_choices_follow_the_named_strategy():
    rng = np.random.default_rng(0)
    assert choose_from_view("max", VIEW, 2, rng) == 10
    assert choose_from_view("sustainable", VIEW, 4, rng) == 4
    after = dict(VIEW, last_round={"group_total": 17, "taken": 5})
    # Others took (17 - 5) / 2 = 6 on average; noise has sd 1, so within a few units.
    picks = [choose_from_view("conditional", after, 2, rng) for _ in range(200)]
    assert 5.5 < np.mean(picks) < 6.5 and min(picks) >= 0 and max(picks) <= 10


def test_bots_play_every_round_of_a_live_session(start_server, demo_study):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    result = {}
    bots = threading.Thread(
        target=lambda: result.update(r=rehearse(
            server.url, demo_study, server.keys, strategy="sustainable", seed=3,
            think_seconds=(0.0, 0.05), max_seconds=60,
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
        target=lambda: result.update(r=rehearse(server.url, study, server.keys, strategy="sustainable",
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
