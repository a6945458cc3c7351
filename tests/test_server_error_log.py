"""Unexpected failures on the production server are answered and logged once, not lost in a loop.

On gevent's server a request's error stream (``wsgi.errors``, where Flask's own log handler
writes once a page has failed) was the server's error log, and that log fed back into Flask's
logger: logging one failure recursed until Python gave up. The failed page printed a
``RecursionError`` over its traceback, and from then on a socket event that failed unexpectedly
got no answer at all. Here a real ``ebbtide serve`` process meets the realistic failure of a
field laptop, a database another program holds locked past SQLite's busy timeout ("database is
locked", Python docs, sqlite3 module), first on a page and then on a socket event.
"""

from __future__ import annotations

import sqlite3

import pytest
from conftest import DEMO, WAIT_SECONDS, Console, ServeProcess, connect_phone, console_login

pytestmark = pytest.mark.slow

PIN = "2468"


def test_a_locked_database_fails_a_page_then_a_socket_event_each_answered_and_logged_once(tmp_path):
    db = tmp_path / "locked.db"
    server = ServeProcess("serve", str(DEMO), "--db", str(db), "--seed", "5", "--pin", PIN)
    try:
        assert server.served_by() == "gevent"
        with sqlite3.connect(db) as conn:
            (secret,) = conn.execute(
                "SELECT secret FROM seat_keys WHERE group_index = 0 AND seat_index = 0").fetchone()
        connect_phone(server.url, secret, device="locked-device").close()  # the seat is claimed
        http = console_login(server.url, PIN)
        console = Console(_console_socket(server.url, http))
        assert console.act("console_start")["ok"]
        assert console.act("console_end")["ok"]  # ended: the debrief may be revealed, a seat released

        blocker = sqlite3.connect(db, isolation_level=None)
        blocker.execute("BEGIN EXCLUSIVE")  # another program holds the file: every write waits, then fails
        try:
            page = http.post(f"{server.url}/console/debrief/reveal", data={"form_token": http.form_token},
                             allow_redirects=False, timeout=WAIT_SECONDS)
            assert page.status_code == 500
            # After a failed page, a failed socket event must still be answered, not left hanging.
            refused = console.act("console_release_seat", {"group": 1, "seat": 1})
            assert refused["ok"] is False and refused["code"] == "server_error", refused
        finally:
            blocker.execute("ROLLBACK")
            blocker.close()
        assert console.act("console_release_seat", {"group": 1, "seat": 1})["ok"]  # works once unlocked
        console.close()
    finally:
        server.kill()
    assert "RecursionError" not in server.stderr, server.stderr[-4000:]
    assert server.stderr.count("Traceback") == 2, server.stderr[-4000:]  # two failures, each logged once
    assert server.stderr.count("database is locked") == 2


def _console_socket(url, http):
    import socketio

    cookie = "; ".join(f"{k}={v}" for k, v in http.cookies.items())
    client = socketio.Client(reconnection=False)
    client.connect(url, auth={"role": "console"}, headers={"Cookie": cookie}, transports=["websocket"],
                   wait_timeout=WAIT_SECONDS)
    return client
