"""Hidden information stays hidden: every byte sent to phones, over a session with every treatment.

Phones here are raw websocket clients speaking the Engine.IO 4 / Socket.IO 5 text protocol
by hand, so that the test keeps every frame exactly as it came off the wire. Hidden values are
chosen to be distinctive (a danger level of 37.913, a seed of sixteen digits, block names and
a title that would tell the design) and searched for together with the JSON keys that would
carry them. Every snapshot a phone receives must also be exactly a ``PhoneSnapshot``: a key
the model does not describe fails.
"""

from __future__ import annotations

import itertools
import json
import threading

import pytest
import requests
import websocket
from conftest import WAIT_SECONDS, connect_console, console_login, wait_until

from ebbtide.game_logic.phone_snapshot import PhoneSnapshot
from ebbtide.game_logic.study import parse_study

THRESHOLD = 37.913
SEED = 8237461905512347
HIDES_LEVEL = {"none", "vague", "range", "signal"}
ROTATION = ["none", "vague", "range", "signal", "exact", "risk"]
# The researcher's words: they would tell participants the design, so they never reach a phone.
RESEARCH_TITLE = "Fennick shore mussels: threshold arms (leak check)"
RESEARCH_NAMES = ("low-threshold-arm", "shown-harvests-arm")
SECOND_LABEL = "Second season"  # the participant-facing label of block 2 (block 1 has none)
STUDY = f"""
[session]
id = "leak-check"
title = "{RESEARCH_TITLE}"

[groups]
count = 6
seats_per_group = 2

[resource]
unit = "nets"
capacity = 100
initial_stock = 60
max_harvest = 12

[threshold]
rule = "fixed"
value = {THRESHOLD}
recovery_gap = 15
flip_probability = 0.5
shown_range = [30, 45]

[end]
rule = "fixed"

[[blocks]]
name = "{RESEARCH_NAMES[0]}"
treatments = {json.dumps(ROTATION)}
rounds = 3
show_others = false

[[blocks]]
name = "{RESEARCH_NAMES[1]}"
label = {{ en = "{SECOND_LABEL}" }}
treatments = {json.dumps(ROTATION[4:] + ROTATION[:4])}
rounds = 3
show_others = true
"""
# Keys that would carry hidden values if a view ever let them through.
HIDDEN_KEYS = ('"threshold"', '"flip_draw"', '"continue_draw"', '"regime', '"seed"', '"hidden"',
               '"secret"', '"crossed"', '"recovered"', '"score"')


class RawPhone:
    """A seat over a bare websocket; ``frames`` holds every text frame the server sent."""

    def __init__(self, url: str, secret: str, device: str):
        address = url.replace("http://", "ws://") + "/socket.io/?EIO=4&transport=websocket"
        self.ws = websocket.create_connection(address, timeout=WAIT_SECONDS)
        self.frames: list[str] = []
        self.acks: dict[int, list] = {}
        self.ids = itertools.count(1)
        self.lock = threading.Lock()
        self.frames.append(self.ws.recv())  # Engine.IO open packet
        self.ws.send("40" + json.dumps({"secret": secret, "device": device}))
        self.reader = threading.Thread(target=self._read, daemon=True)
        self.reader.start()

    def _read(self) -> None:
        while True:
            try:
                frame = self.ws.recv()
            except Exception:
                return
            if not isinstance(frame, str):
                frame = frame.decode("utf-8", "replace")
            with self.lock:
                self.frames.append(frame)
            if frame == "2":
                self.ws.send("3")  # answer the server's ping
            elif frame.startswith("43"):
                digits = "".join(itertools.takewhile(str.isdigit, frame[2:]))
                self.acks[int(digits)] = json.loads(frame[2 + len(digits):])

    def call(self, event: str, body: dict) -> dict:
        ack_id = next(self.ids)
        self.ws.send(f"42{ack_id}" + json.dumps([event, body]))
        return wait_until(lambda: self.acks.get(ack_id), f"the answer to {event}")[0]

    def events(self) -> list[tuple[str, object, str]]:
        """(name, data, raw frame) of every event received."""
        with self.lock:
            frames = list(self.frames)
        out = []
        for frame in frames:
            if frame.startswith("42"):
                name, *args = json.loads(frame[2:])
                out.append((name, args[0] if args else None, frame))
        return out

    def latest(self) -> dict | None:
        snaps = [data for name, data, _ in self.events() if name == "snapshot"]
        return max(snaps, key=lambda s: s["seq"]) if snaps else None

    def wire(self) -> str:
        with self.lock:
            return "\n".join(self.frames)

    def close(self) -> None:
        self.ws.close()
        self.reader.join(timeout=5)


@pytest.fixture
def whole_session(start_server):
    study = parse_study(STUDY)
    server = start_server(study, seed=SEED)
    phones = {(k.group, k.seat): RawPhone(server.url, k.secret, f"leak-device-{k.group}-{k.seat}")
              for k in server.keys}
    console = connect_console(server.url, server.pin)
    yield study, server, phones
    for phone in phones.values():
        phone.close()
    console.close()


def play_round(server, phones, block, round_number, harvest_of):
    for (g, s), phone in phones.items():
        ack = phone.call("harvest", {"decision_id": f"leak-{g}-{s}-{block}-{round_number}", "block": block,
                                     "round": round_number, "harvest": harvest_of(g, s, round_number)})
        assert ack["ok"], ack


def assert_is_a_phone_snapshot(data: dict) -> PhoneSnapshot:
    """The payload is exactly what the model describes: validates (extra keys refused) and round-trips."""
    model = PhoneSnapshot.model_validate(data)
    assert model.payload() == data
    return model


def assert_no_researcher_words(text: str, where) -> None:
    for word in (*RESEARCH_NAMES, RESEARCH_TITLE, "threshold-arm", "block_name"):
        assert word not in text, (where, word)


def test_no_hidden_value_reaches_a_phone_over_a_session_with_every_treatment(whole_session):
    study, server, phones = whole_session
    live = server.live
    console = connect_console(server.url, server.pin)
    try:
        assert console.act("console_start")["ok"]
        # Distinct harvests per seat (invented), so that another seat's number would be a leak.
        harvest_of = lambda g, s, k: (3 + 4 * s + k) % 13  # noqa: E731
        for k in (1, 2, 3):
            play_round(server, phones, 1, k, harvest_of)
        wait_until(lambda: all(p.waiting for p in live.state.groups), "every group to finish block 1")
        assert console.act("console_open_block", {"group": None})["ok"]
        for k in (1, 2, 3):
            play_round(server, phones, 2, k, harvest_of)
        wait_until(lambda: live.state.status == "ended", "the session to end")
        for phone in phones.values():  # refusals travel to phones too
            assert phone.call("harvest", {"decision_id": "leak-after-end", "block": 2, "round": 4,
                                          "harvest": 1})["ok"] is False
        wait_until(lambda: all(p.latest()["status"] == "ended" for p in phones.values()), "final snapshots")
        # A phone that doubts its screen asks again: the answer carries the same model.
        asked_again = {seat: phone.call("snapshot_please", {}) for seat, phone in phones.items()}
    finally:
        console.close()

    draws = [repr(o.flip_draw)[:10] for p in live.state.groups for o in p.outcomes]
    draws += [repr(o.continue_draw)[:10] for p in live.state.groups for o in p.outcomes]
    assert len(draws) == 2 * 6 * 6
    for (g, s), phone in phones.items():
        wire = phone.wire()
        assert "37.91" not in wire and str(SEED) not in wire and str(SEED)[4:12] not in wire
        for key in HIDDEN_KEYS:
            assert key not in wire, (g, s, key)
        for draw in draws:
            assert draw not in wire, (g, s, draw)
        assert "degraded" not in wire and '"good"' not in wire
        assert_no_researcher_words(wire, (g, s))
        assert '"treatment"' not in wire  # the researcher's key; the screen draws the danger's kind
        snapshots = [(data, raw) for name, data, raw in phone.events() if name == "snapshot"]
        assert snapshots
        for data, raw in snapshots + [(asked_again[(g, s)]["snapshot"], "")]:
            view = assert_is_a_phone_snapshot(data).view
            treatment = study.blocks[view.block - 1].treatment_for(g)
            assert view.danger.kind == treatment
            assert view.block_label == (SECOND_LABEL if view.block == 2 else None)
            if treatment in HIDES_LEVEL:
                assert "37.9" not in raw and '"level"' not in raw, (g, s, treatment)
            else:
                assert view.danger.level == 37.9  # what exact and risk may show: rounded
            if not view.show_others:
                assert '"others"' not in raw
                other = 1 - s
                last = data["view"].get("last_round")
                if last:
                    assert set(last) == {"round", "asked", "taken", "points", "group_total", "remaining",
                                         "regrowth", "stock_after", "rationed"}
                    mine, theirs = harvest_of(g, s, last["round"]), harvest_of(g, other, last["round"])
                    assert last["asked"] == mine != theirs


def test_a_revealed_debrief_reaches_phones_as_the_model_with_labels_not_names(whole_session):
    study, server, phones = whole_session
    live = server.live
    console = connect_console(server.url, server.pin)
    try:
        assert console.act("console_start")["ok"]
        for _block in (1, 2):
            for _round in (1, 2, 3):
                assert console.act("console_close_round", {"group": None})["ok"]
            if _block == 1:
                assert console.act("console_open_block", {"group": None})["ok"]
        wait_until(lambda: live.state.status == "ended", "the session to end")
        http = console_login(server.url, server.pin)
        revealed = http.post(f"{server.url}/console/debrief/reveal", data={"form_token": http.form_token},
                             allow_redirects=False, timeout=5)
        assert revealed.status_code == 303
        wait_until(lambda: all(p.latest().get("debrief") for p in phones.values()), "revealed debriefs")
    finally:
        console.close()
    for (g, s), phone in phones.items():
        assert_no_researcher_words(phone.wire(), (g, s))
        debrief = assert_is_a_phone_snapshot(phone.latest()).debrief
        # The group's own threshold, as the console shows it (one decimal), after the reveal only.
        assert [b.threshold for b in debrief.blocks] == [37.9, 37.9]
        assert [b.label for b in debrief.blocks] == [None, SECOND_LABEL]
        assert all(b.svg.startswith("<svg") and b.sentence for b in debrief.blocks)


def test_participant_pages_carry_no_hidden_value(start_server):
    study = parse_study(STUDY)
    server = start_server(study, seed=SEED)
    key = server.keys[0]
    with requests.Session() as http:
        pages = [http.get(f"{server.url}{path}", timeout=5).text
                 for path in ("/play", f"/s/{key.secret}", "/static/phone.js", "/healthz")]
        pages.append(http.post(f"{server.url}/join", data={"code": key.short_code}, timeout=5).text)
    for page in pages:
        # Values and the JSON key that would carry one; the word alone may name code in phone.js.
        assert "37.9" not in page and str(SEED) not in page and '"threshold":' not in page
        assert_no_researcher_words(page, page[:80])
    # Seat cards are handed to participants: the session's neutral name, not the researcher's title.
    cards = console_login(server.url, server.pin).get(f"{server.url}/console/cards", timeout=5).text
    assert_no_researcher_words(cards, "seat cards")
    assert "Harvest game" in cards and "Harvest game" in pages[0]  # no session.label in this study
