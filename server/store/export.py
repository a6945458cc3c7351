"""Export stored sessions as the contract tables (the same tables as the pilot).

The rounds come from ``replay``, the same fold the live server and crash
recovery use. Rounds still open when the export is made have no outcome yet
and are left out; their decisions stay in the log.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from ebbtide.exports.field_day import live_tables
from ebbtide.exports.writer import write_export
from ebbtide.game_logic.session_fold import SessionState, replay
from ebbtide.game_logic.study import parse_study

from .log import Store

EXPORT_SOURCE = "live"


def session_state(store: Store, session_id: str) -> SessionState:
    record = store.session(session_id)
    if record is None:
        raise KeyError(f"no session {session_id!r} in {store.path}")
    study = parse_study(record.study_text)
    return replay(study, record.seed, session_id, store.events(session_id))


def export_session(store: Store, session_id: str, out_dir: str | Path) -> Path:
    """Write decisions.csv, rounds.csv, seats.csv and datapackage.json of one session."""
    record = store.session(session_id)
    if record is None:
        raise KeyError(f"no session {session_id!r} in {store.path}")
    events = store.events(session_id)
    state = replay(parse_study(record.study_text), record.seed, session_id, events)
    # Decision timing, practice rows, cash lines, surveys.csv and timeline.csv (exports/field_day.py).
    tables = live_tables(state, session_id, {e.id: e.created_at for e in events}, events)
    return write_export(out_dir, state.study, session_id, state.seed, EXPORT_SOURCE, tables)


def export_database(db_path: str | Path, out_dir: str | Path,
                    on_session: Callable[[int, int], None] | None = None) -> list[Path]:
    """Export every session of a database.

    One session is written directly into ``out_dir``; several go into one
    subfolder each, named after the session id. ``on_session(done, total)``
    hears of the progress: once before the first session, then after each one.
    """
    store = Store(db_path)
    try:
        ids = [record.session_id for record in store.sessions()]
        tell = on_session or (lambda _done, _total: None)
        tell(0, len(ids))
        written = []
        for sid in ids:
            written.append(export_session(store, sid, out_dir if len(ids) == 1 else Path(out_dir) / sid))
            tell(len(written), len(ids))
        return written
    finally:
        store.close()
