"""A store that fails on purpose, over a real server and real Socket.IO clients.

The promise under test is the house rule "nothing acknowledged is ever lost" plus
"every request gets an answer": an unexpected failure is answered ``server_error``
(logged on the server with the event, no traceback to the client), nothing is
published, and the same decision sent again is stored exactly once.
"""

from __future__ import annotations

import logging
import sqlite3

import pytest
from conftest import connect_console, connect_every_seat, wait_until

from ebbtide.server.store import Store
from ebbtide.server.store.log import Writer


@pytest.fixture
def flaky_store(monkeypatch):
    """Make the next ``failures`` appends of ``kind`` raise what SQLite raises on a locked file.

    ``sqlite3.OperationalError("database is locked")`` is the error the Python standard
    library raises when another writer holds the file past the busy timeout (Python docs,
    sqlite3 module); it is the realistic unexpected failure of a field laptop.
    """
    real_append = Writer.append
    plan = {"kind": None, "left": 0}

    def append(self, kind, body, decision_id=None):
        if kind == plan["kind"] and plan["left"] > 0:
            plan["left"] -= 1
            raise sqlite3.OperationalError("database is locked")
        return real_append(self, kind, body, decision_id)

    monkeypatch.setattr(Writer, "append", append)

    def fail(kind: str, failures: int = 1) -> None:
        plan["kind"], plan["left"] = kind, failures

    return fail


def stored(db_path, kind: str, decision_id: str | None = None) -> list:
    with Store(db_path) as store:
        session_id = store.sessions()[-1].session_id
        return [e for e in store.events(session_id)
                if e.kind == kind and (decision_id is None or e.decision_id == decision_id)]


def test_failed_write_answers_server_error_and_the_resent_decision_is_stored_once(
    start_server, demo_study, flaky_store, caplog
):
    server = start_server(demo_study)
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    try:
        assert console.act("console_start")["ok"]
        phone = phones[(0, 0)]
        before = server.live.state
        flaky_store("harvest_submitted")
        with caplog.at_level(logging.ERROR, logger="ebbtide.server.sockets"):
            first = phone.harvest("flaky-choice-1", 1, 1, 4)

        # Answered, with the stable code; the message is one plain line without a traceback.
        assert first["ok"] is False and first["code"] == "server_error" and first["event"] == "harvest"
        assert "Traceback" not in first["message"] and "OperationalError" not in first["message"]
        problem = wait_until(lambda: [d for n, d in phone.received if n == "problem"], "a problem event")
        assert problem[-1]["code"] == "server_error"
        # Logged on the server, naming the event, with the cause.
        logged = [r for r in caplog.records if "harvest" in r.getMessage()]
        assert len(logged) == 1 and logged[0].exc_info[0] is sqlite3.OperationalError
        # Nothing stored and nothing published: the state is the very version it was.
        assert stored(server.db_path, "harvest_submitted") == []
        assert server.live.state is before and not server.live.state.groups[0].pending

        again = phone.harvest("flaky-choice-1", 1, 1, 4)
        assert again["ok"] and not again["repeated"] and again["harvest"] == 4
        once_more = phone.harvest("flaky-choice-1", 1, 1, 4)  # a late duplicate of the retry
        assert once_more["ok"] and once_more["repeated"]
        assert len(stored(server.db_path, "harvest_submitted", "flaky-choice-1")) == 1
        assert phone.wait_for(lambda s: s["decided"], "the stored choice")["my_harvest"] == 4
    finally:
        for client in [*phones.values(), console]:
            client.close()


def test_failure_while_resolving_a_round_stores_neither_the_decision_nor_half_a_round(
    start_server, demo_study, flaky_store
):
    """The last seat's decision and the round it resolves are one transaction (server/store/log.py)."""
    server = start_server(demo_study)
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    try:
        console.act("console_start")
        assert phones[(0, 0)].harvest("first-seat", 1, 1, 3)["ok"]
        flaky_store("round_resolved")
        failed = phones[(0, 1)].harvest("second-seat", 1, 1, 5)
        assert failed["code"] == "server_error"
        assert stored(server.db_path, "harvest_submitted", "second-seat") == []
        assert stored(server.db_path, "round_resolved") == []
        assert server.live.state.groups[0].outcomes == []  # the published state is still before the round

        retried = phones[(0, 1)].harvest("second-seat", 1, 1, 5)
        assert retried["ok"] and not retried["repeated"]
        assert len(stored(server.db_path, "round_resolved")) == 1
        assert len(server.live.state.groups[0].outcomes) == 1
    finally:
        for client in [*phones.values(), console]:
            client.close()


def test_console_action_that_fails_unexpectedly_is_answered_too(start_server, demo_study, flaky_store):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    try:
        flaky_store("session_started")
        answer = console.act("console_start")
        assert answer == {"ok": False, "event": "console_start", "code": "server_error",
                          "message": answer["message"]}
        assert server.live.state.status == "setup"
        assert console.act("console_start")["ok"] and server.live.state.status == "running"
    finally:
        console.close()
