"""Hostile frames over a raw websocket: reserved event names and malformed packets.

The wire format written here by hand is Engine.IO protocol 4 with Socket.IO protocol 5
(socket.io/docs/v4, "Engine.IO protocol" and "Socket.IO protocol" pages): ``4`` marks an
Engine.IO message, then ``0`` connect, ``2`` event, ``3`` acknowledgement, an optional
acknowledgement id, then JSON.
"""

from __future__ import annotations

import json
import logging
import threading
import time

import pytest
import websocket
from conftest import WAIT_SECONDS, connect_console, connect_phone, wait_until


class RawSocket:
    """A websocket that speaks Socket.IO by hand, so it can send what no client library would."""

    def __init__(self, url: str, auth: dict):
        host = url.removeprefix("http://")
        self.ws = websocket.create_connection(f"ws://{host}/socket.io/?EIO=4&transport=websocket",
                                              timeout=WAIT_SECONDS)
        assert self.ws.recv().startswith("0")  # Engine.IO open
        self.ws.send("40" + json.dumps(auth))
        self.frames: list[str] = []
        self.closed = False
        self._lock = threading.Lock()
        threading.Thread(target=self._read, daemon=True).start()
        wait_until(lambda: any(f.startswith("40{") for f in self.copy()), "the Socket.IO connect answer")

    def _read(self) -> None:
        while True:
            try:
                frame = self.ws.recv()
            except Exception:
                break
            if frame == "2":
                try:
                    self.ws.send("3")  # Engine.IO pong
                except Exception:
                    break
            if not frame:
                break
            with self._lock:
                self.frames.append(frame)
        self.closed = True

    def copy(self) -> list[str]:
        with self._lock:
            return list(self.frames)

    def send(self, frame: str) -> None:
        self.ws.send(frame)

    def ack(self, ack_id: int) -> list:
        """The acknowledgement with this id (bounded wait)."""
        prefix = f"43{ack_id}["
        frame = wait_until(lambda: next((f for f in self.copy() if f.startswith(prefix)), None),
                           f"acknowledgement {ack_id}")
        return json.loads(frame[len(prefix) - 1:])

    def close(self) -> None:
        try:
            self.ws.close(timeout=1)
        except Exception:
            pass
        self.ws.shutdown()  # after the server cut it off, close() alone leaves the socket open


@pytest.fixture
def server(start_server, demo_study):
    return start_server(demo_study)


@pytest.fixture
def no_tracebacks(caplog, monkeypatch):
    """Fails the test if anything logs a traceback or a thread dies of an exception."""
    died = []
    monkeypatch.setattr(threading, "excepthook", died.append)
    caplog.set_level(logging.INFO)
    yield caplog
    assert not died, [str(d.exc_value) for d in died]
    with_trace = [r.getMessage() for r in caplog.records if r.exc_info or "Traceback" in r.getMessage()]
    assert not with_trace, with_trace


def stored_kinds(server) -> list[str]:
    return [e.kind for e in server.live.store.events(server.live.session_id)]


@pytest.mark.parametrize("name", ["connect", "disconnect", "*", "message", "connect_error"])
def test_reserved_event_names_are_refused_like_unknown_events(server, no_tracebacks, name):
    console = connect_console(server.url, server.pin)
    key = server.key(0, 0)
    raw = RawSocket(server.url, {"secret": key.secret, "device": "raw-device-1"})
    try:
        before = stored_kinds(server)
        assert before.count("seat_claimed") == 1
        # Fresh credentials (another device) and none at all: neither may re-run the seat claim.
        for ack_id, body in enumerate([{"secret": key.secret, "device": "raw-device-2"}, {}], start=1):
            raw.send(f"42{ack_id}" + json.dumps([name, body]))
            (answer,) = raw.ack(ack_id)
            assert answer["ok"] is False and answer["code"] == "unknown_event", answer
            assert "harvest" in answer["message"]  # the list of events that exist
        assert stored_kinds(server) == before  # no durable seat_claimed, nothing at all
        # The server still knows the socket: the console counts it online, and it can play.
        assert server.app.extensions["ebbtide"].online().get((0, 0)) == 1
        assert console.act("console_start")["ok"]
        raw.send("429" + json.dumps(["harvest", {"decision_id": "raw-decision-1", "block": 1, "round": 1,
                                                 "harvest": 2}]))
        assert raw.ack(9)[0]["ok"] is True
    finally:
        raw.close()
        console.close()


def test_reserved_event_names_count_toward_the_flood_limit(server, no_tracebacks):
    key = server.key(0, 0)
    raw = RawSocket(server.url, {"secret": key.secret, "device": "raw-device-1"})
    try:
        for ack_id in range(1, 31):  # the phone's limit is 20 messages in 10 s (docs/server.md)
            claim = {"secret": key.secret, "device": f"dev-{ack_id:05d}"}
            raw.send(f"42{ack_id}" + json.dumps(["connect", claim]))
        codes = [raw.ack(ack_id)[0]["code"] for ack_id in range(1, 31)]
        assert codes[:20] == ["unknown_event"] * 20 and set(codes[20:]) == {"too_many"}
        assert stored_kinds(server).count("seat_claimed") == 1
    finally:
        raw.close()


REFUSED_NAMES = {
    "a list": '["harvest"]',
    "an object": '{"harvest": 1}',
    "a number": "7",
    "null": "null",
    "a star": '"*"',
}


@pytest.mark.parametrize("name", list(REFUSED_NAMES.values()), ids=list(REFUSED_NAMES))
def test_event_names_that_are_not_text_are_refused(server, no_tracebacks, name):
    raw = RawSocket(server.url, {"secret": server.key(0, 0).secret, "device": "raw-device-1"})
    try:
        raw.send(f"425[{name}, {{}}]")
        (answer,) = raw.ack(5)
        assert answer["ok"] is False and answer["code"] == "unknown_event"
        assert not raw.closed
    finally:
        raw.close()


UNREADABLE = {
    "nested 5000 deep": "421" + '["harvest",' + "[" * 5000 + "]" * 5000 + "]",
    "nested object 3000 deep": "421" + '["harvest",' + '{"a":' * 3000 + "1" + "}" * 3000 + "]",
    "integer of 5000 digits": "421" + '["harvest",{"harvest":' + "9" * 5000 + "}]",
    "integer of 3000 digits": "421" + '["harvest",{"harvest":' + "9" * 3000 + "}]",
    "engine-level JSON nested deep": "4" + "[" * 3000,
    "empty frame": "",
    "not a packet type": "x42[]",
    "socket type never sent by clients": "44\"boom\"",
    "truncated JSON": '421["harvest",{"harvest":',
    "a million attachments": '451000000-1["harvest",{"_placeholder":true,"num":0}]',
}


@pytest.mark.parametrize("frame", list(UNREADABLE.values()), ids=list(UNREADABLE))
def test_unreadable_frames_close_only_their_socket(server, no_tracebacks, frame):
    console = connect_console(server.url, server.pin)
    neighbour = connect_phone(server.url, server.key(0, 1).secret, device="calm-device")
    raw = RawSocket(server.url, {"secret": server.key(0, 0).secret, "device": "raw-device-1"})
    try:
        assert console.act("console_start")["ok"]
        raw.send(frame)
        wait_until(lambda: raw.closed, "the sender's connection to be closed")
        started = time.monotonic()
        ack = neighbour.harvest("calm-decision-1", 1, 1, 4)
        assert ack["ok"] and time.monotonic() - started < WAIT_SECONDS
        assert "harvest_submitted" in stored_kinds(server)
        assert stored_kinds(server).count("harvest_submitted") == 1  # nothing from the raw socket
    finally:
        raw.close()
        neighbour.close()
        console.close()


def test_a_stream_of_bad_frames_does_not_slow_other_phones(server, no_tracebacks):
    console = connect_console(server.url, server.pin)
    neighbour = connect_phone(server.url, server.key(1, 1).secret, device="calm-device")
    stop = threading.Event()

    def attack() -> None:
        deadline = time.monotonic() + 10  # bounded
        frames = list(UNREADABLE.values())
        i = 0
        while not stop.is_set() and time.monotonic() < deadline:
            try:
                raw = RawSocket(server.url, {"secret": server.key(0, 0).secret, "device": "raw-device-1"})
                raw.send(frames[i % len(frames)])
                wait_until(lambda r=raw: r.closed, "close", timeout=5)
                raw.close()
            except Exception:
                pass
            i += 1

    thread = threading.Thread(target=attack, daemon=True)
    try:
        assert console.act("console_start")["ok"]
        thread.start()
        time.sleep(0.5)
        for round_number in (1,):
            started = time.monotonic()
            ack = neighbour.harvest(f"calm-decision-{round_number}", 1, round_number, 3)
            assert ack["ok"] and time.monotonic() - started < WAIT_SECONDS
    finally:
        stop.set()
        thread.join(timeout=15)
        neighbour.close()
        console.close()
