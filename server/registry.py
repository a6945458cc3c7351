"""Live sessions: the stored log and its replayed state, kept in step behind one lock.

Order for every change: check against the replayed state (a refusal changes
nothing) -> append to the store (committed, on disk) -> fold into the state.
The caller acknowledges only after this returns, so an acknowledged decision is
always on disk.
"""

from __future__ import annotations

import secrets
import threading
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from werkzeug.security import check_password_hash, generate_password_hash

from ebbtide.exports.tables import group_code, seat_code
from ebbtide.game_logic.errors import Refused
from ebbtide.game_logic.rounds import RoundOutcome
from ebbtide.game_logic.session_fold import Receipt, SessionState, replay
from ebbtide.game_logic.study import Study, parse_study

from .console.payment_sheet import PaymentSheet, payment_sheet
from .phone.view import add_to_console_snapshot, add_to_seat_snapshot
from .store import SeatKey, SessionRecord, Store

# No 0/O, 1/I: a code read aloud or typed on a small keyboard cannot be mistaken.
SHORT_CODE_ALPHABET = "23456789ABCDEFGHJKLMNPQRSTUVWXYZ"
SHORT_CODE_LENGTH = 6
SEAT_SECRET_BYTES = 18  # 144 bits, above the 128 asked for


def new_short_code() -> str:
    return "".join(secrets.choice(SHORT_CODE_ALPHABET) for _ in range(SHORT_CODE_LENGTH))


def normalise_short_code(typed: str) -> str:
    """Upper-case and drop spaces and dashes, as people type codes in many ways."""
    return "".join(ch for ch in typed.upper() if ch.isalnum())


def new_pin() -> str:
    return f"{secrets.randbelow(10**6):06d}"


@dataclass(frozen=True)
class Change:
    """What one accepted request did: its event, whether it was new, rounds it resolved."""

    seq: int
    is_new: bool
    resolved: tuple[RoundOutcome, ...] = ()
    receipt: Receipt | None = None


class LiveSession:
    """One running session: its design, its seat keys, its log and its state."""

    def __init__(self, store: Store, record: SessionRecord, keys: list[SeatKey]):
        self.store = store
        self.record = record
        self.study: Study = parse_study(record.study_text)
        self.keys = keys
        self._lock = threading.RLock()
        self.state: SessionState = replay(
            self.study, record.seed, record.session_id, store.events(record.session_id)
        )

    @property
    def session_id(self) -> str:
        return self.record.session_id

    def pin_matches(self, pin: str) -> bool:
        return check_password_hash(self.record.pin_hash, pin)

    def submit(self, kind: str, body: dict[str, Any], decision_id: str | None = None) -> Change:
        """Check, store and apply one event; raise ``Refused`` (nothing changed) if it cannot be."""
        return self.submit_many([(kind, body, decision_id)])

    def submit_many(self, requests: list[tuple[str, dict[str, Any], str | None]]) -> Change:
        """Check every event, then store them (and the rounds they resolve) in one transaction.

        All or nothing: one refusal refuses the lot. The events must not depend on
        each other's checks (paper slips of one round: distinct seats).
        """
        with self.store.writing(), self._lock:  # a commit starting meanwhile waits for this change
            fresh = []
            for kind, body, decision_id in requests:
                if decision_id is not None and decision_id in self.state.receipts:
                    receipt = self.state.receipts[decision_id]
                    if (receipt.group, receipt.seat) != (body.get("group"), body.get("seat")):
                        raise Refused("bad_request", "that decision id belongs to another seat")
                    continue
                self.state.check(kind, body)
                fresh.append((kind, body, decision_id))
            if not fresh:
                decision_id = requests[-1][2]
                change = Change(self.state.seq, False, receipt=self.state.receipts.get(decision_id))
                ticket = None  # a repeat: its first copy may still be on its way to disk
            else:
                change, ticket = self._write(fresh, requests)
        try:
            # Outside the session's lock: changes arriving meanwhile share the next commit's fsync.
            self.store.make_durable(ticket)
        except BaseException:
            with self._lock:  # the commit failed: rebuild the state from what is really stored
                self.state = replay(self.study, self.record.seed, self.session_id,
                                    self.store.events(self.session_id))
            raise
        return change

    def _write(self, fresh: list, requests: list) -> tuple[Change, int]:
        """Store (not yet durable) and apply checked events; the caller holds the lock."""
        resolved: list[RoundOutcome] = []
        try:
            with self.store.pending(self.session_id) as writer:
                for kind, body, decision_id in fresh:
                    event, _ = writer.append(kind, body, decision_id)
                    done = self.state.apply(kind, body, decision_id, event.id)
                    for outcome in done:
                        audit, _ = writer.append("round_resolved", _audit(outcome))
                        self.state.seq = audit.id
                    resolved.extend(done)
        except BaseException:
            # The change rolled back (its savepoint): rebuild the state from what is really stored.
            self.state = replay(self.study, self.record.seed, self.session_id,
                                self.store.events(self.session_id))
            raise
        last_id = requests[-1][2]
        receipt = self.state.receipts.get(last_id) if last_id else None
        return Change(self.state.seq, True, tuple(resolved), receipt), writer.ticket

    def seat_snapshot(self, group: int, seat: int) -> dict[str, Any]:
        with self._lock:
            # the stock picture, talk countdown and revealed debrief (phone/view.py)
            return add_to_seat_snapshot(self, group, seat, self.state.seat_snapshot(group, seat))

    def payment_sheet(self) -> PaymentSheet:
        with self._lock:
            return payment_sheet(self.state, self.keys)

    def console_snapshot(self, online: dict[tuple[int, int], int] | None = None) -> dict[str, Any]:
        with self._lock:
            # small gauges, talk countdowns, the signal's parts (phone/view.py)
            return add_to_console_snapshot(self, console_snapshot(self.state, self.keys, online or {}))


def _audit(outcome: RoundOutcome) -> dict[str, Any]:
    return {
        "group": outcome.group, "block": outcome.block + 1, "round": outcome.round,
        "asked": list(outcome.asked), "taken": list(outcome.taken),
        "stock_before": outcome.stock_before, "stock_after": outcome.stock_after,
        "regime_after": str(outcome.regime_after), "end_reason": outcome.end_reason,
    }


def console_snapshot(
    state: SessionState, keys: list[SeatKey], online: dict[tuple[int, int], int]
) -> dict[str, Any]:
    """What the facilitator sees: everything, hidden values included (and marked so).

    ``online`` counts the sockets open on each seat right now (a dead phone shows 0).
    """
    study = state.study
    codes = {(k.group, k.seat): k.short_code for k in keys}
    groups = []
    for g, progress in enumerate(state.groups):
        gs = progress.state
        groups.append({
            "group": g + 1,
            "group_id": group_code(g),
            "block": gs.block + 1,
            "block_name": study.blocks[gs.block].name,
            "treatment": study.blocks[gs.block].treatment_for(g),
            "round": gs.round + (0 if gs.block_over else 1),
            "stock": gs.stock,
            "waiting_for_block": progress.waiting,
            "paused": progress.paused,
            "session_over": gs.session_over,
            "hidden": {"threshold": gs.threshold, "regime": str(gs.regime)},
            "seats": [
                {
                    "seat": s + 1,
                    "seat_id": seat_code(g, s),
                    "short_code": codes.get((g, s), ""),
                    "devices": len(state.devices.get((g, s), [])),
                    "online": online.get((g, s), 0),
                    "released": (g, s) in state.released,
                    "decided": s in progress.pending,
                    "harvest": progress.pending[s].harvest if s in progress.pending else None,
                    "source": progress.pending[s].source if s in progress.pending else None,
                    "entry": progress.pending[s].event_id if s in progress.pending else None,
                    "points": progress.points[s],
                }
                for s in range(study.seats)
            ],
            "rounds": [
                {
                    "block": o.block + 1, "round": o.round, "stock_before": o.stock_before,
                    "asked": list(o.asked), "taken": list(o.taken), "remaining": o.remaining,
                    "stock_after": o.stock_after, "sources": list(src),
                    "hidden": {
                        "threshold": o.threshold, "regime_after": str(o.regime_after),
                        "crossed": o.crossed, "flip_draw": round(o.flip_draw, 4),
                    },
                    "end_reason": o.end_reason or "",
                }
                for o, src in zip(progress.outcomes, progress.sources, strict=True)
            ],
        })
    return {
        "seq": state.seq,
        "session_id": state.session_id,
        "title": study.session.title,
        "status": state.status,
        "blocks": len(study.blocks),
        "seats_per_group": study.seats,
        "groups": groups,
    }


class Registry:
    """Every live session of one database, and the lookups phones need (on ``app.extensions``)."""

    def __init__(self, store: Store):
        self.store = store
        self._lock = threading.Lock()
        self._sessions: dict[str, LiveSession] = {}
        self.current_id: str | None = None
        self._connections: dict[str, Any] = {}  # socket id -> who is connected on it

    def remember(self, sid: str, connection: Any) -> None:
        with self._lock:
            self._connections[sid] = connection

    def connection(self, sid: str) -> Any:
        with self._lock:
            return self._connections.get(sid)

    def forget(self, sid: str) -> None:
        with self._lock:
            self._connections.pop(sid, None)

    def online(self) -> dict[tuple[int, int], int]:
        """Open phone sockets per (group, seat)."""
        counts: dict[tuple[int, int], int] = {}
        with self._lock:
            for conn in self._connections.values():
                if conn.role == "phone":
                    counts[(conn.group, conn.seat)] = counts.get((conn.group, conn.seat), 0) + 1
        return counts

    def seat_sids(self, group: int, seat: int) -> list[str]:
        """Socket ids of the phones open on one seat."""
        with self._lock:
            return [sid for sid, conn in self._connections.items()
                    if conn.role == "phone" and (conn.group, conn.seat) == (group, seat)]

    def open(self, session_id: str) -> LiveSession:
        """Load (replay) a stored session and make it the one served."""
        with self._lock:
            record = self.store.session(session_id)
            if record is None:
                raise KeyError(f"no session {session_id!r} in {self.store.path}")
            live = LiveSession(self.store, record, self.store.seat_keys(session_id))
            self._sessions[session_id] = live
            self.current_id = session_id
            return live

    def create(self, study: Study, seed: int, pin: str, now: datetime | None = None) -> LiveSession:
        """Store a new session for ``study`` with fresh seat keys and open it."""
        now = now or datetime.now(UTC)
        stamp = now.strftime("%Y%m%d-%H%M%S")
        session_id = f"{study.session.id}-{stamp}"
        suffix = 1
        while self.store.session(session_id) is not None:
            suffix += 1
            session_id = f"{study.session.id}-{stamp}-{suffix}"
        keys = []
        taken: set[str] = set()
        for g in range(study.groups.count):
            for s in range(study.seats):
                code = new_short_code()
                while code in taken or self.store.short_code_taken(code):
                    code = new_short_code()
                taken.add(code)
                keys.append(SeatKey(session_id, g, s, secrets.token_urlsafe(SEAT_SECRET_BYTES), code))
        record = SessionRecord(
            session_id=session_id,
            study_text=study.source_text,
            seed=seed,
            pin_hash=generate_password_hash(pin),
            secret_key=secrets.token_hex(32),
            created_at=now.isoformat(timespec="seconds"),
        )
        body = {"study_sha256": study.sha256, "seed": seed, "pin_hash": record.pin_hash,
                "study_text": study.source_text}
        self.store.create_session(record, keys, body)
        return self.open(session_id)

    def resumable(self, study: Study) -> str | None:
        """Id of the latest session of this study that has not ended, if any."""
        for record in reversed(self.store.sessions()):
            if parse_study(record.study_text).session.id != study.session.id:
                continue
            state = replay(parse_study(record.study_text), record.seed, record.session_id,
                           self.store.events(record.session_id))
            return record.session_id if state.status != "ended" else None
        return None

    def start_or_resume(
        self, study: Study, seed: int | None, pin: str | None
    ) -> tuple[LiveSession, str | None]:
        """Resume the study's unfinished session, else create one; returns (session, new PIN or None).

        A resumed session keeps its seed and PIN: the log is the truth. A PIN given
        on resume must match the stored one.
        """
        session_id = self.resumable(study)
        if session_id is not None:
            live = self.open(session_id)
            if pin is not None and not live.pin_matches(pin):
                raise Refused(
                    "wrong_pin",
                    f"session {session_id} already has a console PIN and the one given differs; "
                    "start without --pin to keep the stored one",
                )
            if seed is not None and seed != live.record.seed:
                raise Refused(
                    "wrong_seed",
                    f"session {session_id} was created with seed {live.record.seed}, not {seed}; "
                    "start without --seed to resume it",
                )
            return live, None
        pin = pin or new_pin()
        seed = secrets.randbits(63) if seed is None else seed
        return self.create(study, seed, pin), pin

    @property
    def current(self) -> LiveSession:
        if self.current_id is None:
            raise LookupError("no session is open")
        return self._sessions[self.current_id]

    def seat_by_secret(self, secret: str) -> tuple[LiveSession, SeatKey] | None:
        live = self._sessions.get(self.current_id) if self.current_id else None
        if live is None:
            return None
        for key in live.keys:
            if secrets.compare_digest(key.secret.encode(), secret.encode()):
                return live, key
        return None

    def seat_by_short_code(self, typed: str) -> tuple[LiveSession, SeatKey] | None:
        code = normalise_short_code(typed)
        live = self._sessions.get(self.current_id) if self.current_id else None
        if live is None or len(code) != SHORT_CODE_LENGTH:
            return None
        for key in live.keys:
            if secrets.compare_digest(key.short_code.encode(), code.encode()):
                return live, key
        return None
