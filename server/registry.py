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
from ebbtide.game_logic.money import decimal_text, earnings
from ebbtide.game_logic.rounds import RoundOutcome
from ebbtide.game_logic.session_fold import Receipt, SessionState, replay
from ebbtide.game_logic.study import Study, parse_study

from .console.payment_sheet import PaymentSheet, payment_sheet
from .console.talk import TalkPauses
from .phone.view import add_to_console_snapshot, seat_snapshot_payload
from .ratelimit import FailureLimiter
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


class SessionVersion:
    """One published version of a live session, for readers that look at it more than once.

    ``state`` stays the version it was made with; everything else is the live session's.
    """

    def __init__(self, live: LiveSession, state: SessionState):
        self._live = live
        self.state = state

    def __getattr__(self, name: str) -> Any:
        return getattr(self._live, name)


class LiveSession:
    """One running session: its design, its seat keys, its log and its published state.

    Copy-on-write: every accepted change is folded into a fork of the state under
    the session's lock and published whole once it is committed, so ``state`` may
    be read from any thread without the lock and never changes under its reader.
    """

    def __init__(self, store: Store, record: SessionRecord, keys: list[SeatKey]):
        self.store = store
        self.record = record
        self.study: Study = parse_study(record.study_text)
        self.keys = keys
        self._lock = threading.RLock()  # one writer at a time; readers need no lock
        self._state: SessionState = replay(
            self.study, record.seed, record.session_id, store.events(record.session_id)
        )

    @property
    def state(self) -> SessionState:
        """The latest published version; never changed after publication."""
        return self._state

    def pinned(self) -> SessionVersion:
        """The session as of now, for building one page or snapshot from one version."""
        return SessionVersion(self, self._state)

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

        All or nothing: one refusal refuses the lot, and a failed write publishes
        nothing. The events must not depend on each other's checks (paper slips of
        one round: distinct seats).
        """
        with self.store.writing(), self._lock:  # a commit starting meanwhile waits for this change
            state = self._state
            fresh = []
            for kind, body, decision_id in requests:
                if decision_id is not None and decision_id in state.receipts:
                    receipt = state.receipts[decision_id]
                    if (receipt.group, receipt.seat) != (body.get("group"), body.get("seat")):
                        raise Refused("bad_request", "that decision id belongs to another seat")
                    continue
                state.check(kind, body)
                fresh.append((kind, body, decision_id))
            if not fresh:
                decision_id = requests[-1][2]
                change = Change(state.seq, False, receipt=state.receipts.get(decision_id))
                ticket = None  # a repeat: its first copy may still be on its way to disk
            else:
                change, ticket = self._write(state, fresh, requests)
        try:
            # Outside the session's lock: changes arriving meanwhile share the next commit's fsync.
            self.store.make_durable(ticket)
        except BaseException:
            with self._lock:  # the commit failed: rebuild the state from what is really stored
                self._state = replay(self.study, self.record.seed, self.session_id,
                                     self.store.events(self.session_id))
            raise
        return change

    def _write(self, state: SessionState, fresh: list, requests: list) -> tuple[Change, int]:
        """Store (durable once a commit carries it) and fold checked events into a new version.

        The caller holds the lock. The new version is published once its events are written
        inside the open transaction, so the next decision is checked against it; had a write
        failed, the savepoint rolls back and the draft is dropped, so nothing is published.
        """
        draft = state.fork()
        resolved: list[RoundOutcome] = []
        with self.store.pending(self.session_id) as writer:
            for kind, body, decision_id in fresh:
                event, _ = writer.append(kind, body, decision_id)
                done = draft.apply(kind, body, decision_id, event.id)
                for outcome in done:
                    audit, _ = writer.append("round_resolved", _audit(outcome))
                    draft.seq = audit.id
                resolved.extend(done)
        self._state = draft
        last_id = requests[-1][2]
        receipt = draft.receipts.get(last_id) if last_id else None
        return Change(draft.seq, True, tuple(resolved), receipt), writer.ticket

    def seat_snapshot(self, group: int, seat: int) -> dict[str, Any]:
        """The ``snapshot`` payload of one seat: a validated ``PhoneSnapshot`` as JSON (phone/view.py)."""
        return seat_snapshot_payload(self.pinned(), group, seat)

    def payment_sheet(self) -> PaymentSheet:
        return payment_sheet(self.state, self.keys)

    def console_snapshot(self, online: dict[tuple[int, int], int] | None = None) -> dict[str, Any]:
        version = self.pinned()
        # small gauges, talk countdowns, the signal's parts (phone/view.py)
        return add_to_console_snapshot(version, console_snapshot(version.state, self.keys, online or {}))


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
                    "points": decimal_text(earnings(progress.units[s], study.payment).points),
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


class StudyChanged(Refused):
    """The study file differs from the one the stored session was created with."""

    def __init__(self, session_id: str, stored_sha256: str, given_sha256: str):
        self.session_id = session_id
        self.stored_sha256 = stored_sha256
        self.given_sha256 = given_sha256
        super().__init__(
            "study_changed",
            f"the study file is not the one session {session_id} was created with "
            f"(stored SHA-256 {stored_sha256}, this file {given_sha256}); nothing was started. "
            "Either restore the study file the session was created with to continue it, "
            "or start a new session from this file with --new-session",
        )


# How a session came to be served (printed by ``ebbtide serve``).
NEW, RESUMED, REOPENED = "new", "resumed", "reopened"


@dataclass(frozen=True)
class Opening:
    """The session served after start-up, how it came to be served, and its PIN if new."""

    live: LiveSession
    how: str  # NEW | RESUMED | REOPENED (it had ended: kept to read, pay and export)
    pin: str | None


class Registry:
    """Every live session of one database and all of its runtime state (on ``app.extensions``).

    Runtime state is what the log does not hold: open sockets and their flood
    counters, talk pauses, the language each seat's phone chose, and the
    failure limiters of the PIN and code forms. It all lives here, one object
    per app, each part behind its own lock.
    """

    def __init__(self, store: Store):
        self.store = store
        self._lock = threading.Lock()
        self._sessions: dict[str, LiveSession] = {}
        self._served: LiveSession | None = None  # one reference: current and current_id agree
        self._connections: dict[str, Any] = {}  # socket id -> who is connected on it
        self.flood_lock = threading.Lock()  # guards the per-connection flood counters
        self.talk_pauses = TalkPauses()
        self._seat_languages: dict[tuple[str, int, int], str] = {}
        self._limiters: dict[str, FailureLimiter] = {}

    # -- runtime state -----------------------------------------------------------

    def limiter(self, name: str) -> FailureLimiter:
        """The failure limiter of one form (PIN, seat code), made on first use."""
        with self._lock:
            return self._limiters.setdefault(name, FailureLimiter())

    def set_seat_language(self, session_id: str, group: int, seat: int, language: str) -> None:
        with self._lock:
            self._seat_languages[(session_id, group, seat)] = language

    def seat_language(self, session_id: str, group: int, seat: int) -> str | None:
        with self._lock:
            return self._seat_languages.get((session_id, group, seat))

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

    # -- sessions ------------------------------------------------------------------

    def open(self, session_id: str) -> LiveSession:
        """Load (replay) a stored session and make it the one served."""
        record = self.store.session(session_id)
        if record is None:
            raise KeyError(f"no session {session_id!r} in {self.store.path}")
        live = LiveSession(self.store, record, self.store.seat_keys(session_id))
        with self._lock:
            self._sessions[session_id] = live
            self._served = live
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

    def latest_of(self, study: Study) -> SessionRecord | None:
        """The latest stored session of this study (by its ``session.id``), ended or not."""
        for record in reversed(self.store.sessions()):
            if parse_study(record.study_text).session.id == study.session.id:
                return record
        return None

    def start_or_resume(
        self, study: Study, seed: int | None, pin: str | None, new_session: bool = False
    ) -> Opening:
        """Serve the study's latest session (resumed, or reopened if it has ended), else a new one.

        A new session when none is stored or ``new_session`` asks for one. A stored
        session keeps its seed and PIN (the log is the truth): a seed or PIN given
        must match, and the study file must be the very one it was created with.
        """
        record = None if new_session else self.latest_of(study)
        if record is None:
            pin = pin or new_pin()
            seed = secrets.randbits(63) if seed is None else seed
            return Opening(self.create(study, seed, pin), NEW, pin)
        stored_sha256 = parse_study(record.study_text).sha256
        if stored_sha256 != study.sha256:
            raise StudyChanged(record.session_id, stored_sha256, study.sha256)
        if seed is not None and seed != record.seed:
            raise Refused(
                "wrong_seed",
                f"session {record.session_id} was created with seed {record.seed}, not {seed}; "
                "start without --seed to continue it, or with --new-session for a new one",
            )
        if pin is not None and not check_password_hash(record.pin_hash, pin):
            raise Refused(
                "wrong_pin",
                f"session {record.session_id} already has a console PIN and the one given differs; "
                "start without --pin to keep the stored one",
            )
        live = self.open(record.session_id)
        return Opening(live, REOPENED if live.state.status == "ended" else RESUMED, None)

    @property
    def current_id(self) -> str | None:
        served = self._served
        return None if served is None else served.session_id

    @property
    def current(self) -> LiveSession:
        served = self._served  # one read: safe from any thread
        if served is None:
            raise LookupError("no session is open")
        return served

    def seat_by_secret(self, secret: str) -> tuple[LiveSession, SeatKey] | None:
        live = self._served
        if live is None:
            return None
        for key in live.keys:
            if secrets.compare_digest(key.secret.encode(), secret.encode()):
                return live, key
        return None

    def seat_by_short_code(self, typed: str) -> tuple[LiveSession, SeatKey] | None:
        code = normalise_short_code(typed)
        live = self._served
        if live is None or len(code) != SHORT_CODE_LENGTH:
            return None
        for key in live.keys:
            if secrets.compare_digest(key.short_code.encode(), code.encode()):
                return live, key
        return None
