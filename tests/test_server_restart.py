"""Crash safety: a real `ebbtide serve` process killed mid-round resumes from its database."""

from __future__ import annotations

import pytest
from conftest import DEMO, ServeProcess, connect_console, connect_phone

from ebbtide.game_logic.rounds import resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.study import load_study
from ebbtide.server.store import Store

SEED, PIN = 77, "2468"
pytestmark = pytest.mark.slow


def test_restart_mid_round_loses_no_acknowledged_decision(tmp_path):
    db = tmp_path / "field-day.db"
    first = ServeProcess("serve", str(DEMO), "--db", str(db), "--seed", str(SEED), "--pin", PIN)
    try:
        assert any("new session" in line for line in first.printed)
        assert first.served_by() == "gevent"  # the production server, not Werkzeug's threads
        with Store(db) as store:
            keys = store.seat_keys(store.sessions()[0].session_id)
        console = connect_console(first.url, PIN)
        console.act("console_start")
        phones = {(k.group, k.seat): connect_phone(first.url, k.secret, f"device-{k.group}-{k.seat}")
                  for k in keys}
        acks = [phones[(0, 0)].harvest("before-crash-a", 1, 1, 9),
                phones[(1, 1)].harvest("before-crash-b", 1, 1, 4)]
        assert all(a["ok"] for a in acks)
        for client in [*phones.values(), console]:
            client.close()
    finally:
        first.kill()
    first.assert_no_traceback()

    second = ServeProcess("serve", str(DEMO), "--db", str(db))
    try:
        assert any("resumed session" in line for line in second.printed)
        assert second.served_by() == "gevent"
        phone_a = connect_phone(second.url, keys[0].secret, device="device-0-0")
        snap = phone_a.latest()
        assert snap["decided"] and snap["my_harvest"] == 9 and snap["status"] == "running"
        resend = phone_a.harvest("before-crash-a", 1, 1, 9)
        assert resend["ok"] and resend["repeated"]
        phone_b = connect_phone(second.url, keys[1].secret, device="device-0-1")
        assert phone_b.harvest("after-restart", 1, 1, 3)["ok"]
        snap = phone_a.wait_for(lambda s: "last_round" in s["view"], "the round result")
        result = snap["view"]["last_round"]
        phone_a.close()
        phone_b.close()
    finally:
        second.kill()
    second.assert_no_traceback()

    # Independent check straight from the core: same seed, same harvests.
    study = load_study(DEMO)
    _, outcome = resolve(study, start_block(study, SEED, 0, 0), [9, 3], round_rng(SEED, 0, 0, 1))
    assert result["asked"] == 9 and result["taken"] == outcome.taken[0]
    assert result["stock_after"] == outcome.stock_after
    with Store(db) as store:
        session_id = store.sessions()[0].session_id
        kinds = [e.kind for e in store.events(session_id)]
        sessions = store.sessions()
    assert kinds.count("harvest_submitted") == 3 and len(sessions) == 1
