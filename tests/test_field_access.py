"""Access: seat secrets, the console's PIN and cookie, security headers, no path traversal, floods."""

from __future__ import annotations

import base64
import http.client
import threading
import time

import pytest
import requests
import socketio
from conftest import WAIT_SECONDS, connect_console, connect_phone, console_login, wait_until

from ebbtide.server.registry import SEAT_SECRET_BYTES


@pytest.fixture
def server(start_server, demo_study):
    return start_server(demo_study)


def raw_get(url: str, path: str) -> tuple[int, bytes]:
    """One GET with the path sent exactly as written (no client-side clean-up of dots)."""
    host, port = url.removeprefix("http://").split(":")
    conn = http.client.HTTPConnection(host, int(port), timeout=5)
    try:
        conn.putrequest("GET", path, skip_accept_encoding=True)
        conn.endheaders()
        response = conn.getresponse()
        return response.status, response.read()
    finally:
        conn.close()


def test_seat_secrets_hold_at_least_128_random_bits_and_differ(server):
    secrets_seen = [k.secret for k in server.keys]
    assert len(set(secrets_seen)) == len(secrets_seen)
    for secret in secrets_seen:
        raw = base64.urlsafe_b64decode(secret + "=" * (-len(secret) % 4))
        assert len(raw) == SEAT_SECRET_BYTES and len(raw) * 8 >= 128


@pytest.mark.parametrize(
    "path",
    [
        "/static/../server/store.py",
        "/static/..%2fserver%2fstore.py",
        "/static/%2e%2e/server/store.py",
        "/static/%2e%2e%2fpyproject.toml",
        "/static/vendor/../../pyproject.toml",
        "/static//etc/passwd",
        "/static/%2fetc%2fpasswd",
        "/static/..\\server\\store.py",
        "/static/....//....//pyproject.toml",
        "/s/..%2f..%2fpyproject.toml",
        "/console/..%2f..%2fpyproject.toml",
        "/%2e%2e/%2e%2e/etc/passwd",
        "//etc/passwd",
    ],
)
def test_no_route_serves_a_file_outside_static(server, path):
    status, body = raw_get(server.url, path)
    assert status in (301, 302, 308, 400, 404), (path, status)
    for secret_text in (b"import sqlite_utils", b"[build-system]", b"root:x:0", b"root:"):
        assert secret_text not in body, path


def test_static_files_are_served_from_the_static_folder(server):
    status, body = raw_get(server.url, "/static/ebbtide.css")
    assert status == 200 and b"Ebbtide" in body


PAGES = ["/play", "/console/login", "/console", "/console/cards", "/console/payments"]


@pytest.mark.parametrize("path", PAGES)
def test_pages_carry_the_security_headers(server, path):
    http = console_login(server.url, server.pin)
    headers = http.get(f"{server.url}{path}", timeout=5).headers
    csp = headers["Content-Security-Policy"]
    assert "default-src 'self'" in csp and "frame-ancestors 'none'" in csp
    assert "unsafe-inline" not in csp and "unsafe-eval" not in csp
    assert headers["X-Content-Type-Options"] == "nosniff"
    assert headers["Referrer-Policy"] == "no-referrer"
    assert headers["X-Frame-Options"] == "DENY"
    if path.startswith("/console"):
        assert headers["Cache-Control"] == "no-store"
    card_link = requests.get(f"{server.url}/s/{server.keys[0].secret}", timeout=5)
    assert card_link.headers["Cache-Control"] == "no-store"
    http.close()


def test_console_socket_without_the_login_cookie_is_refused(server):
    for headers in ({}, {"Cookie": "session=forged.value.here"}):
        client = socketio.Client(reconnection=False)
        errors = []
        client.on("connect_error", errors.append)
        with pytest.raises(socketio.exceptions.ConnectionError):
            client.connect(server.url, auth={"role": "console"}, headers=headers, transports=["websocket"],
                           wait_timeout=5)
        assert "PIN" in errors[0]["message"]


def test_phone_socket_emitting_console_events_is_refused_and_changes_nothing(server):
    phone = connect_phone(server.url, server.keys[0].secret)
    try:
        before = len(server.live.store.events(server.live.session_id))
        for event in ("console_start", "console_end", "console_pause", "console_open_block", "console_enter",
                      "console_slips", "console_correct", "console_release_seat", "console_pause_group"):
            ack = phone.client.call(event, {}, timeout=WAIT_SECONDS)
            assert ack["code"] == "not_allowed", event
        assert len(server.live.store.events(server.live.session_id)) == before
        assert server.live.state.status == "setup"
    finally:
        phone.close()


def test_unknown_event_is_refused_with_the_list_of_events(server):
    phone = connect_phone(server.url, server.keys[0].secret)
    try:
        ack = phone.client.call("take_everything", {"harvest": 10**9}, timeout=WAIT_SECONDS)
        assert ack["code"] == "unknown_event" and "harvest" in ack["message"]
    finally:
        phone.close()


def test_flooding_socket_is_throttled_while_another_phone_of_its_group_is_served(server):
    console = connect_console(server.url, server.pin)
    flooder = connect_phone(server.url, server.key(0, 0).secret, device="flooding-device")
    neighbour = connect_phone(server.url, server.key(0, 1).secret, device="calm-device")
    try:
        assert console.act("console_start")["ok"]
        stop = threading.Event()

        def flood():
            deadline = time.monotonic() + 8  # bounded
            while not stop.is_set() and time.monotonic() < deadline and flooder.client.connected:
                flooder.client.emit("harvest", {"decision_id": "flood-flood", "block": 1, "round": 1,
                                                "harvest": "x" * 2000})

        thread = threading.Thread(target=flood, daemon=True)
        thread.start()
        wait_until(lambda: any(n == "problem" and d["code"] == "too_many" for n, d in flooder.received),
                   "the flooder to be throttled")
        ack = neighbour.harvest("calm-decision-1", 1, 1, 4)
        flood_still_running = thread.is_alive()
        stop.set()
        thread.join(timeout=10)
        assert ack["ok"] and not ack["repeated"]
        # Answered while the flood still ran: the neighbour was not starved until it stopped.
        assert flood_still_running
        kinds = [e.kind for e in server.live.store.events(server.live.session_id)]
        assert kinds.count("harvest_submitted") == 1
    finally:
        for client in (flooder, neighbour, console):
            client.close()


def test_oversized_message_closes_only_the_sender(server):
    console = connect_console(server.url, server.pin)
    big = connect_phone(server.url, server.key(1, 0).secret, device="big-device")
    big_socket = big.client.eio.ws.sock
    other = connect_phone(server.url, server.key(1, 1).secret, device="other-device")
    try:
        console.act("console_start")
        big.client.emit("harvest", {"decision_id": "big-message", "block": 1, "round": 1,
                                    "harvest": 1, "pad": "x" * 100_000})
        wait_until(lambda: not big.client.connected, "the oversized sender to be cut off")
        assert other.harvest("other-decision", 1, 1, 2)["ok"]
        ids = [e.decision_id for e in server.live.store.events(server.live.session_id)]
        assert "big-message" not in ids and "other-decision" in ids
    finally:
        for client in (big, other, console):
            client.close()
        big_socket.close()  # cut off by the server, the client library leaves its end open
