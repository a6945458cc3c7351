"""Load smoke test: 100 phones on the production server, all deciding at once, nothing lost.

A small version of bench/live_load.py (which measures; this only counts): ``ebbtide serve``
as its own process on gevent's server, 20 groups of 5 real Socket.IO phones, three rounds
in which every phone decides at the same moment. Every decision must be acknowledged,
stored exactly once (read back with plain sqlite3, not through the project's store), and
every phone must hold every round's result. "Acknowledged means stored, exactly once" is
the project's own rule; no timing is asserted.
"""

from __future__ import annotations

import sqlite3
from concurrent.futures import ThreadPoolExecutor

import pytest
import requests
from conftest import ServeProcess, connect_console, connect_phone, wait_until

from bench.load_study import SEATS, study_text

pytestmark = pytest.mark.slow

PHONES = 100
ROUNDS = 3


def test_hundred_phones_deciding_at_once_lose_and_duplicate_nothing(tmp_path):
    study = tmp_path / "smoke.toml"
    study.write_text(study_text(PHONES // SEATS, ROUNDS), encoding="utf-8")
    db = tmp_path / "smoke.db"
    server = ServeProcess("serve", str(study), "--db", str(db), "--pin", "2468", "--seed", "11")
    phones = {}
    console = None
    try:
        # The production server, not Werkzeug's development server (which names itself here too).
        served_by = requests.get(f"{server.url}/healthz", timeout=10).headers.get("Server", "")
        assert "werkzeug" not in served_by.lower() and server.served_by() == "gevent"
        keys = sqlite3.connect(db).execute(
            "SELECT group_index, seat_index, secret FROM seat_keys ORDER BY 1, 2").fetchall()
        assert len(keys) == PHONES
        with ThreadPoolExecutor(max_workers=20) as pool:
            connected = pool.map(
                lambda k: ((k[0], k[1]), connect_phone(server.url, k[2], f"smoke-{k[0]}-{k[1]}")), keys)
            phones = dict(connected)
        console = connect_console(server.url, "2468")
        assert console.act("console_start")["ok"]

        def decide(key, r):
            return phones[key].harvest(f"smoke-{key[0]}-{key[1]}-{r}", 1, r, 1 + key[1] % 3)

        for r in range(1, ROUNDS + 1):
            with ThreadPoolExecutor(max_workers=PHONES) as pool:
                acks = list(pool.map(lambda key, r=r: decide(key, r), phones))
            assert all(ack["ok"] and not ack["repeated"] for ack in acks), [a for a in acks if not a["ok"]]
            for phone in phones.values():
                phone.wait_for(lambda s, r=r: (s["view"].get("last_round") or {}).get("round") == r,
                               f"round {r}'s result on every phone")
        stored = sqlite3.connect(db).execute(
            "SELECT json_extract(body, '$.group'), json_extract(body, '$.seat'),"
            " json_extract(body, '$.round'), count(*) FROM events WHERE kind = 'harvest_submitted'"
            " GROUP BY 1, 2, 3").fetchall()
        counts = {(g, s, r): n for g, s, r, n in stored}
        expected = {(g, s, r) for (g, s) in phones for r in range(1, ROUNDS + 1)}
        assert set(counts) == expected  # nothing lost
        assert set(counts.values()) == {1}  # nothing duplicated
        wait_until(lambda: all(len(g["rounds"]) == ROUNDS for g in console.states[-1]["groups"]),
                   "the console to show every round")
    finally:
        for phone in phones.values():
            phone.close()
        if console is not None:
            console.close()
        server.kill()
    server.assert_no_traceback()
