"""The SQLite event store: the only module that touches the database.

A session is its study text, its seed and an append-only log of events. Nothing
is updated in place; a correction is a new event that references the old one.
Every write goes through one connection behind one lock (one writer), in WAL
mode with ``synchronous=FULL``, so an event is on disk when ``append`` returns:
acknowledged means stored.

Group commit: a live change is written with ``pending`` (inside the open transaction) and
made durable with ``make_durable`` once the caller has let go of its own lock. Whoever
finds no commit running commits everything written so far with one fsync; changes that
arrive meanwhile wait and go together in the next one. So a burst of decisions costs a few
fsyncs rather than one each (measured in bench/live_load.py, docs/performance.md), and
nothing is acknowledged before its commit returns.
"""

from __future__ import annotations

import json
import sqlite3
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import sqlite_utils

BUSY_TIMEOUT_MS = 5000
# A commit waits this long at most for changes already on their way (``Store.writing``),
# so they share its fsync; an fsync itself takes a few milliseconds (docs/performance.md).
GATHER_SECONDS = 0.005


@dataclass(frozen=True)
class SessionRecord:
    """What was fixed when a session was created."""

    session_id: str
    study_text: str
    seed: int
    pin_hash: str
    secret_key: str
    created_at: str


@dataclass(frozen=True)
class SeatKey:
    """The credentials printed on one seat card (group and seat 0-based)."""

    session_id: str
    group: int
    seat: int
    secret: str
    short_code: str


@dataclass(frozen=True)
class Event:
    """One stored event; ``id`` orders the log and doubles as the sequence number."""

    id: int
    session_id: str
    kind: str
    body: dict[str, Any]
    decision_id: str | None
    created_at: str


def connect(path: str | Path) -> sqlite3.Connection:
    """A connection with the pragmas every connection of Ebbtide must have."""
    conn = sqlite3.connect(str(path), check_same_thread=False, isolation_level=None)
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    conn.execute("PRAGMA foreign_keys = ON")
    conn.execute("PRAGMA journal_mode = WAL")
    # FULL: a commit is fsynced before it returns, so an acknowledged decision survives a power cut.
    conn.execute("PRAGMA synchronous = FULL")
    return conn


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="milliseconds")


class Store:
    """Append-only event log of one database file, safe to share between threads."""

    def __init__(self, path: str | Path, *, group_commit: bool = True,
                 offload: Callable[[Callable[[], Any]], Any] | None = None):
        """``offload(fn)`` runs a commit (its fsync) where it does not stall other clients:
        gevent's thread pool under gevent (server/serving.py); by default, right here."""
        self.path = Path(path)
        self._lock = threading.Lock()
        self.db = sqlite_utils.Database(connect(self.path))
        self._group_commit = group_commit
        self._offload = offload or (lambda fn: fn())
        self._durability = threading.Condition(threading.Lock())
        self._written = 0  # changes written to the open transaction, counted from the start
        self._durable = 0  # of those, how many are committed
        self._committing = False
        self._lost: list[tuple[int, int]] = []  # (after, through): changes of a commit that failed
        self._in_flight = 0  # callers inside ``writing()``: about to write, worth waiting for
        self.gather_seconds = GATHER_SECONDS
        self.closed = False  # set by close(): late background work (a deferred console refresh) stops
        self._create_tables()

    def close(self) -> None:
        with self._lock:
            if self.db.conn.in_transaction:
                self.db.conn.execute("COMMIT")
            self.db.close()
            self.closed = True

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc_info) -> None:
        self.close()

    def _create_tables(self) -> None:
        with self._lock:
            self.db["sessions"].create(
                {
                    "session_id": str, "study_text": str, "seed": int, "pin_hash": str,
                    "secret_key": str, "created_at": str,
                },
                pk="session_id", if_not_exists=True,
            )
            self.db["seat_keys"].create(
                {"session_id": str, "group_index": int, "seat_index": int, "secret": str, "short_code": str},
                pk=("session_id", "group_index", "seat_index"),
                foreign_keys=[("session_id", "sessions", "session_id")],
                if_not_exists=True,
            )
            self.db["seat_keys"].create_index(["secret"], unique=True, if_not_exists=True)
            self.db["seat_keys"].create_index(["short_code"], unique=True, if_not_exists=True)
            self.db["events"].create(
                {
                    "id": int, "session_id": str, "kind": str, "body": str,
                    "decision_id": str, "created_at": str,
                },
                pk="id", not_null={"session_id", "kind", "body"},
                foreign_keys=[("session_id", "sessions", "session_id")],
                if_not_exists=True,
            )
            # A resent decision must find its first copy, never become a second one.
            self.db["events"].create_index(
                ["session_id", "decision_id"], unique=True, if_not_exists=True
            )

    # -- writing ---------------------------------------------------------------

    def create_session(
        self, record: SessionRecord, seat_keys: list[SeatKey], body: dict[str, Any]
    ) -> Event:
        """Store a new session, its seat keys and its ``session_created`` event at once."""
        with self.atomic(record.session_id):
            # Plain statements: sqlite-utils' insert commits on its own, which would split this transaction.
            self.db.conn.execute(
                "INSERT INTO sessions (session_id, study_text, seed, pin_hash, secret_key, created_at)"
                " VALUES (?, ?, ?, ?, ?, ?)",
                (record.session_id, record.study_text, record.seed, record.pin_hash,
                 record.secret_key, record.created_at),
            )
            self.db.conn.executemany(
                "INSERT INTO seat_keys (session_id, group_index, seat_index, secret, short_code)"
                " VALUES (?, ?, ?, ?, ?)",
                [(k.session_id, k.group, k.seat, k.secret, k.short_code) for k in seat_keys],
            )
            return self._insert_event(record.session_id, "session_created", body, None)

    def append(
        self, session_id: str, kind: str, body: dict[str, Any], decision_id: str | None = None
    ) -> tuple[Event, bool]:
        """Append one event and commit it; returns (event, is_new).

        An event whose ``decision_id`` is already stored is not written again:
        the first copy comes back with ``is_new`` False.
        """
        with self.atomic(session_id) as writer:
            return writer.append(kind, body, decision_id)

    @contextmanager
    def atomic(self, session_id: str) -> Iterator[Writer]:
        """One transaction: every event appended through the writer is committed together, or none.

        A decision and the round it resolves are stored at once, so a crash
        never leaves a half-told round in the log.
        """
        with self.pending(session_id) as writer:
            yield writer
        self.make_durable(writer.ticket)

    @contextmanager
    def pending(self, session_id: str) -> Iterator[Writer]:
        """Like ``atomic``, but not yet durable: call ``make_durable(writer.ticket)`` before acknowledging.

        The change is all or nothing (a savepoint inside the open transaction); it is
        visible to this store's readers at once, and on disk once ``make_durable`` returns.
        """
        with self._lock:
            conn = self.db.conn
            if not conn.in_transaction:
                conn.execute("BEGIN IMMEDIATE")
            conn.execute("SAVEPOINT change")
            writer = Writer(self, session_id)
            try:
                yield writer
            except BaseException:
                conn.execute("ROLLBACK TO change")
                conn.execute("RELEASE change")
                raise
            conn.execute("RELEASE change")
            self._written += 1
            writer.ticket = self._written
            if not self._group_commit:  # one fsync per change, for comparison (bench/live_load.py)
                conn.execute("COMMIT")
                self._durable = self._written

    @contextmanager
    def writing(self) -> Iterator[None]:
        """Wrap the work that leads to a ``pending`` write (checks, waiting for a lock):
        a commit starting meanwhile waits for it (up to ``gather_seconds``) and takes it along."""
        with self._durability:
            self._in_flight += 1
        try:
            yield
        finally:
            with self._durability:
                self._in_flight -= 1
                self._durability.notify_all()

    def make_durable(self, ticket: int | None = None) -> None:
        """Return once change ``ticket`` (default: every change written so far) is committed.

        Raises ``sqlite3.Error`` if the commit that carried it failed (then nothing of
        that commit is stored, and the caller must not acknowledge).
        """
        with self._durability:
            if ticket is None:
                ticket = self._written
            while True:
                self._raise_if_lost(ticket)
                if self._durable >= ticket:
                    return
                if not self._committing:
                    self._committing = True
                    break
                self._durability.wait()
            deadline = time.monotonic() + self.gather_seconds
            while self._in_flight and (left := deadline - time.monotonic()) > 0:
                self._durability.wait(left)
        after = self._durable
        failed = None
        with self._lock:
            through = self._written
            try:
                if self.db.conn.in_transaction:
                    self._offload(lambda: self.db.conn.execute("COMMIT"))
            except BaseException as exc:
                failed = exc
                if self.db.conn.in_transaction:
                    self.db.conn.execute("ROLLBACK")
        with self._durability:
            self._committing = False
            if failed is None:
                self._durable = through
            else:
                self._lost.append((after, through))
            self._durability.notify_all()
            self._raise_if_lost(ticket)

    def _raise_if_lost(self, ticket: int) -> None:
        for after, through in self._lost:
            if after < ticket <= through:
                raise sqlite3.OperationalError(f"change {ticket} was not stored: its commit failed")

    def _insert_event(
        self, session_id: str, kind: str, body: dict[str, Any], decision_id: str | None
    ) -> Event:
        created = _now()
        cursor = self.db.conn.execute(
            "INSERT INTO events (session_id, kind, body, decision_id, created_at) VALUES (?, ?, ?, ?, ?)",
            (session_id, kind, json.dumps(body, sort_keys=True), decision_id, created),
        )
        return Event(cursor.lastrowid, session_id, kind, body, decision_id, created)

    # -- reading ---------------------------------------------------------------

    def _event_by_decision(self, session_id: str, decision_id: str) -> Event | None:
        # Asked for every decision, almost always in vain: a bare indexed lookup first.
        found = self.db.conn.execute(
            "SELECT 1 FROM events WHERE session_id = ? AND decision_id = ?", (session_id, decision_id)
        ).fetchone()
        if found is None:
            return None
        rows = list(
            self.db.query(
                "SELECT * FROM events WHERE session_id = ? AND decision_id = ?", (session_id, decision_id)
            )
        )
        return _event(rows[0]) if rows else None

    def sessions(self) -> list[SessionRecord]:
        """Every session in the database, oldest first."""
        with self._lock:
            rows = list(self.db.query("SELECT * FROM sessions ORDER BY created_at, session_id"))
        return [SessionRecord(**row) for row in rows]

    def session(self, session_id: str) -> SessionRecord | None:
        with self._lock:
            rows = list(self.db.query("SELECT * FROM sessions WHERE session_id = ?", (session_id,)))
        return SessionRecord(**rows[0]) if rows else None

    def seat_keys(self, session_id: str) -> list[SeatKey]:
        with self._lock:
            rows = list(
                self.db.query(
                    "SELECT * FROM seat_keys WHERE session_id = ? ORDER BY group_index, seat_index",
                    (session_id,),
                )
            )
        return [
            SeatKey(r["session_id"], r["group_index"], r["seat_index"], r["secret"], r["short_code"])
            for r in rows
        ]

    def short_code_taken(self, code: str) -> bool:
        with self._lock:
            return bool(list(self.db.query("SELECT 1 FROM seat_keys WHERE short_code = ?", (code,))))

    def events(self, session_id: str) -> list[Event]:
        """The whole log of a session in the order it was written."""
        with self._lock:
            rows = list(
                self.db.query("SELECT * FROM events WHERE session_id = ? ORDER BY id", (session_id,))
            )
        return [_event(row) for row in rows]

    def first_times(self, session_id: str) -> dict[str, str]:
        """When each kind of event first happened in a session (the console's clock of the day)."""
        with self._lock:
            if self.closed:
                return {}  # shutting down: the console's clock has nobody to show it to
            rows = self.db.query(
                "SELECT kind, MIN(created_at) AS first FROM events WHERE session_id = ? GROUP BY kind",
                (session_id,),
            )
            return {row["kind"]: row["first"] for row in rows}

    def last_events(self, session_id: str, limit: int) -> list[Event]:
        """The latest ``limit`` events of a session, oldest first."""
        with self._lock:
            if self.closed:
                return []
            rows = list(self.db.query(
                "SELECT * FROM events WHERE session_id = ? ORDER BY id DESC LIMIT ?", (session_id, limit)
            ))
        return [_event(row) for row in reversed(rows)]


class Writer:
    """Appends events inside one ``Store.atomic`` transaction."""

    def __init__(self, store: Store, session_id: str):
        self._store = store
        self._session_id = session_id
        self.ticket = 0  # set when the change is written; see Store.make_durable

    def append(
        self, kind: str, body: dict[str, Any], decision_id: str | None = None
    ) -> tuple[Event, bool]:
        """Append one event; a stored ``decision_id`` returns its first copy with ``is_new`` False."""
        if decision_id is not None:
            earlier = self._store._event_by_decision(self._session_id, decision_id)
            if earlier is not None:
                return earlier, False
        return self._store._insert_event(self._session_id, kind, body, decision_id), True


def _event(row: dict) -> Event:
    return Event(
        row["id"], row["session_id"], row["kind"], json.loads(row["body"]),
        row["decision_id"], row["created_at"],
    )
