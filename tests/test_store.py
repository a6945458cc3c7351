"""The SQLite event store: pragmas, append-only order, idempotent decisions, atomic creation."""

from __future__ import annotations

import sqlite3

import pytest

from ebbtide.server.store import SeatKey, SessionRecord, Store


def record(session_id="s-1"):
    return SessionRecord(session_id, "study text", 5, "pin-hash", "cookie-key", "2026-01-01T00:00:00")


@pytest.fixture
def store(tmp_path):
    with Store(tmp_path / "events.db") as opened:
        opened.create_session(record(), [SeatKey("s-1", 0, 0, "secret-aaaaaaaaaaaaaaaa", "ABCDEF")], {})
        yield opened


def test_every_connection_has_wal_full_sync_foreign_keys_and_busy_timeout(store):
    pragma = lambda name: store.db.execute(f"PRAGMA {name}").fetchone()[0]  # noqa: E731
    assert pragma("journal_mode") == "wal"
    assert pragma("synchronous") == 2  # FULL, per the SQLite pragma documentation
    assert pragma("foreign_keys") == 1
    assert pragma("busy_timeout") == 5000


def test_events_come_back_in_the_order_written(store):
    for n in range(3):
        store.append("s-1", "harvest_submitted", {"n": n})
    assert [e.body.get("n") for e in store.events("s-1")] == [None, 0, 1, 2]


def test_same_decision_id_is_stored_once_and_returned_again(store):
    first, new_first = store.append("s-1", "harvest_submitted", {"harvest": 3}, "decision-1")
    second, new_second = store.append("s-1", "harvest_submitted", {"harvest": 9}, "decision-1")
    assert new_first and not new_second and second == first
    assert len([e for e in store.events("s-1") if e.kind == "harvest_submitted"]) == 1


def test_event_for_an_unknown_session_is_refused_by_the_foreign_key(store):
    with pytest.raises(sqlite3.IntegrityError):
        store.append("no-such-session", "session_started", {})


def test_failed_session_creation_leaves_nothing_behind(store):
    clash = SeatKey("s-2", 0, 0, "secret-bbbbbbbbbbbbbbbb", "ABCDEF")  # short code already used
    with pytest.raises(sqlite3.IntegrityError):
        store.create_session(record("s-2"), [clash], {})
    assert [r.session_id for r in store.sessions()] == ["s-1"]
    assert store.events("s-2") == []


def test_appended_event_is_readable_from_a_second_connection(store, tmp_path):
    store.append("s-1", "session_started", {})
    with Store(tmp_path / "events.db") as other:
        assert [e.kind for e in other.events("s-1")][-1] == "session_started"
