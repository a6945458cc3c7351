"""Group commit: changes that arrive together share one commit, and none is durable before it.

Outside references: SQLite's documentation on isolation ("changes made by one connection
are invisible to other database connections prior to commit") and on WAL with
``synchronous=FULL`` (the WAL is synced at every commit), so another connection seeing a
row means its commit has run. COMMIT statements are counted with sqlite3's trace callback
(Python standard library documentation, ``Connection.set_trace_callback``).
"""

from __future__ import annotations

import sqlite3
import threading

import pytest

from ebbtide.server.store import SeatKey, SessionRecord, Store


@pytest.fixture
def store(tmp_path):
    with Store(tmp_path / "events.db") as opened:
        opened.create_session(SessionRecord("s-1", "study text", 5, "pin-hash", "cookie-key", "2026-01-01"),
                              [SeatKey("s-1", 0, 0, "secret-aaaaaaaaaaaaaaaa", "ABCDEF")], {})
        yield opened


def stored_elsewhere(store: Store) -> int:
    """Harvests another connection (another process, as far as SQLite knows) can read."""
    with sqlite3.connect(store.path) as other:
        return other.execute("SELECT count(*) FROM events WHERE kind = 'harvest_submitted'").fetchone()[0]


def count_commits(store: Store) -> list[str]:
    seen: list[str] = []
    store.db.conn.set_trace_callback(lambda sql: sql.strip().upper() == "COMMIT" and seen.append(sql))
    return seen


def test_pending_change_is_not_durable_until_make_durable(store):
    with store.pending("s-1") as writer:
        writer.append("harvest_submitted", {"harvest": 1}, "decision-pending-1")
    assert stored_elsewhere(store) == 0
    store.make_durable(writer.ticket)
    assert stored_elsewhere(store) == 1


def test_changes_on_their_way_share_one_commit(store):
    store.gather_seconds = 30.0  # generous: the test releases the second writer itself
    commits = count_commits(store)
    second_may_write = threading.Event()
    first_committing = threading.Event()
    errors: list[BaseException] = []

    def second_writer():
        try:
            with store.writing():
                first_committing.wait(10)
                second_may_write.wait(10)
                with store.pending("s-1") as writer:
                    writer.append("harvest_submitted", {"harvest": 2}, "decision-second")
            store.make_durable(writer.ticket)
        except BaseException as exc:  # surfaced below
            errors.append(exc)

    with store.writing():
        with store.pending("s-1") as first:
            first.append("harvest_submitted", {"harvest": 1}, "decision-first")
    thread = threading.Thread(target=second_writer)
    thread.start()
    committer = threading.Thread(target=store.make_durable, args=(first.ticket,))
    committer.start()
    first_committing.set()
    committer.join(0.3)
    assert committer.is_alive()  # it waits for the change on its way, not committing alone
    second_may_write.set()
    committer.join(10)
    thread.join(10)
    assert not errors
    assert len(commits) == 1
    assert stored_elsewhere(store) == 2


def test_without_group_commit_every_change_commits_on_its_own(tmp_path):
    with Store(tmp_path / "solo.db", group_commit=False) as solo:
        solo.create_session(SessionRecord("s-0", "study text", 5, "pin-hash", "cookie-key", "2026-01-01"),
                            [], {})
        commits = count_commits(solo)
        for n in range(3):
            with solo.pending("s-0") as writer:
                writer.append("harvest_submitted", {"n": n})
            assert len(commits) == n + 1  # committed before make_durable is even asked


def test_failed_commit_raises_and_stores_nothing(store):
    def failing(_commit):
        raise sqlite3.OperationalError("disk I/O error")  # what SQLite reports when the fsync fails

    store._offload = failing
    with store.pending("s-1") as writer:
        writer.append("harvest_submitted", {"harvest": 1}, "decision-doomed")
    with pytest.raises(sqlite3.OperationalError):
        store.make_durable(writer.ticket)
    assert stored_elsewhere(store) == 0
    assert [e.kind for e in store.events("s-1")] == ["session_created"]
    store._offload = lambda commit: commit()
    with store.pending("s-1") as writer:  # the store keeps working after the failure
        writer.append("harvest_submitted", {"harvest": 1}, "decision-after")
    store.make_durable(writer.ticket)
    assert stored_elsewhere(store) == 1


def test_failed_pending_change_rolls_back_alone(store):
    with store.pending("s-1") as kept:
        kept.append("harvest_submitted", {"harvest": 1}, "decision-kept")
    with pytest.raises(RuntimeError), store.pending("s-1") as broken:
        broken.append("harvest_submitted", {"harvest": 2}, "decision-broken")
        raise RuntimeError("a rule refused the change half-way")
    store.make_durable()
    assert [e.decision_id for e in store.events("s-1")][1:] == ["decision-kept"]
    assert stored_elsewhere(store) == 1
