"""Crash safety: phones play on while a real `ebbtide serve` is SIGKILLed at seeded random moments.

After each kill the same command restarts on the same database; the phones come back
with their seat secrets and resend any decision they got no answer for. At the end,
every acknowledged decision must be in the log and the export, and every resolved
round must equal an independent replay through ``game_logic``.
"""

from __future__ import annotations

import csv
import subprocess
import sys
import threading
import time

import numpy as np
import pytest
import socketio
from conftest import ROOT, ServeProcess, connect_phone, console_login
from studies import make_study

from ebbtide.game_logic.rounds import resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.server.store import Store

pytestmark = pytest.mark.slow

SEED, PIN, KILL_SEED = 918273645, "1357", 20250601
KILLS = 6
ACK_SECONDS = 2.0
PHONE_PAUSE = 0.6  # seconds between one phone's decisions: under the flood limit of 20 in 10 s


class PlayingPhone(threading.Thread):
    """One seat playing until its connection dies; keeps the decision it got no answer for."""

    def __init__(self, url, key, rng, acks, lock, pending):
        super().__init__(daemon=True)
        self.url, self.key, self.rng = url, key, rng
        self.acks, self.lock, self.pending = acks, lock, pending

    def run(self) -> None:
        deadline = time.monotonic() + 30  # bounded even if nothing kills the server
        try:
            device = f"device-{self.key.group}-{self.key.seat}"
            phone = connect_phone(self.url, self.key.secret, device=device)
            raw_socket = phone.client.eio.ws.sock
        except Exception:
            return
        try:
            seat = (self.key.group, self.key.seat)
            if seat in self.pending:  # no answer before the crash: resend with the same id
                self._send(phone, self.pending[seat])
            while time.monotonic() < deadline and phone.client.connected:
                snap = max(phone.snapshots, key=lambda s: s["seq"], default=None)
                idle = snap is None or snap["status"] != "running" or snap["decided"]
                if idle or snap["view"]["block_over"]:
                    time.sleep(0.02)
                    continue
                view = snap["view"]
                number = int(self.rng.integers(0, 10**9))
                decision = (f"g{seat[0]}s{seat[1]}-{number:09d}", view["block"], view["round"],
                            int(self.rng.integers(0, 4)))
                self.pending[seat] = decision
                self._send(phone, decision)
                time.sleep(PHONE_PAUSE)
        except Exception:
            return  # the server died under us: the test restarts it
        finally:
            try:
                phone.close()
            except Exception:
                pass
            raw_socket.close()  # when the server died first, the client library leaves it open

    def _send(self, phone, decision) -> None:
        decision_id, block, round_number, harvest = decision
        # A short bound: a killed server never answers, and the phone then keeps the decision to resend.
        ack = phone.client.call("harvest", {"decision_id": decision_id, "block": block, "round": round_number,
                                            "harvest": harvest}, timeout=ACK_SECONDS)
        seat = (self.key.group, self.key.seat)
        self.pending.pop(seat, None)
        if ack["ok"]:
            with self.lock:
                self.acks[decision_id] = (seat[0], seat[1], ack["block"], ack["round"], ack["harvest"])


def start_session(url: str) -> None:
    """Log in, press start, and close every connection used for it."""
    with console_login(url, PIN) as http:
        cookie = "; ".join(f"{k}={v}" for k, v in http.cookies.items())
    client = socketio.Client(reconnection=False)
    client.connect(url, auth={"role": "console"}, headers={"Cookie": cookie}, transports=["websocket"],
                   wait_timeout=10)
    try:
        assert client.call("console_start", {}, timeout=10)["ok"]
    finally:
        client.disconnect()


def independent_rounds(study, seed, harvest_events):
    """Resolve every complete round of the logged harvests with game_logic alone."""
    by_round: dict[tuple[int, int], dict[int, int]] = {}
    for body in harvest_events:
        by_round.setdefault((body["group"], body["round"]), {})[body["seat"]] = body["harvest"]
    expected = {}
    for g in range(study.groups.count):
        state = start_block(study, seed, g, 0)
        k = 1
        while len(by_round.get((g, k), {})) == study.seats:
            harvests = [by_round[(g, k)][s] for s in range(study.seats)]
            state, outcome = resolve(study, state, harvests, round_rng(seed, g, 0, k))
            expected[(g, k)] = outcome
            k += 1
    return expected


def test_sigkill_at_random_moments_loses_no_acknowledged_decision(tmp_path):
    study = make_study(groups=2, seats=3, initial=80, max_harvest=3, rounds=100)
    study_path = tmp_path / "crash-study.toml"
    study_path.write_text(study.source_text, encoding="utf-8")
    db = tmp_path / "crash.db"
    kill_rng = np.random.default_rng(KILL_SEED)
    acks: dict[str, tuple] = {}
    pending: dict[tuple[int, int], tuple] = {}
    lock = threading.Lock()
    keys = None
    servers = []
    for run in range(KILLS + 1):
        extra = ("--seed", str(SEED), "--pin", PIN) if run == 0 else ()
        server = ServeProcess("serve", str(study_path), "--db", str(db), *extra)
        servers.append(server)
        try:
            assert server.served_by() == "gevent"  # the production server, not Werkzeug's threads
            if keys is None:
                with Store(db) as store:
                    keys = store.seat_keys(store.sessions()[0].session_id)
                start_session(server.url)
            if run == KILLS:
                break  # the last start only proves the database opens again
            phones = [PlayingPhone(server.url, key, np.random.default_rng([KILL_SEED, run, i]), acks, lock,
                                   pending) for i, key in enumerate(keys)]
            for phone in phones:
                phone.start()
            time.sleep(float(kill_rng.uniform(0.4, 2.5)))
        finally:
            server.kill()
        for phone in phones:
            phone.join(timeout=15)
            assert not phone.is_alive()
    for server in servers:  # killed at any moment, none may have failed before that
        server.assert_no_traceback()
    print(f"crash test: {len(acks)} acknowledged decisions over {KILLS} kills")
    assert len(acks) >= 3 * len(keys), "too few decisions were played to test anything"

    with Store(db) as store:
        session_id = store.sessions()[0].session_id
        events = store.events(session_id)
    harvests = {e.decision_id: e.body for e in events if e.kind == "harvest_submitted"}
    for decision_id, (g, s, block, round_number, harvest) in acks.items():
        body = harvests[decision_id]
        assert (body["group"], body["seat"], body["block"], body["round"], body["harvest"]) == (
            g, s, block, round_number, harvest)
    seat_rounds = {(b["group"], b["seat"], b["round"]) for b in harvests.values()}
    assert len(seat_rounds) == len(harvests)  # no seat decided twice in a round

    expected = independent_rounds(study, SEED, [e.body for e in events if e.kind == "harvest_submitted"])
    audits = {(e.body["group"], e.body["round"]): e.body for e in events if e.kind == "round_resolved"}
    assert set(audits) == set(expected)  # every resolved round has its audit copy, written with it
    for key, outcome in expected.items():
        assert audits[key]["taken"] == list(outcome.taken)
        assert audits[key]["stock_after"] == outcome.stock_after

    out = tmp_path / "export"
    done = subprocess.run([sys.executable, "-m", "ebbtide.server.cli", "export", str(db), "--out", str(out)],
                          cwd=ROOT, capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    with (out / "decisions.csv").open(encoding="utf-8", newline="") as handle:
        exported = {(r["group_id"], r["seat_id"], int(r["round"])): int(r["harvest_asked"])
                    for r in csv.DictReader(handle)}
    for g, s, _block, round_number, harvest in acks.values():
        if (g, round_number) in expected:  # decisions of a still open round stay in the log only
            assert exported[(f"G{g + 1:02d}", f"G{g + 1:02d}-{s + 1}", round_number)] == harvest
    with (out / "rounds.csv").open(encoding="utf-8", newline="") as handle:
        rounds = {(int(r["group_id"][1:]) - 1, int(r["round"])): int(r["stock_after"])
                  for r in csv.DictReader(handle)}
    assert rounds == {key: o.stock_after for key, o in expected.items()}
    print(f"crash test: {len(expected)} resolved rounds equal the independent replay")
