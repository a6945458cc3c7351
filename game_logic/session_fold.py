"""Rebuild a session from its event log: the one place where events become rounds.

The live server, crash recovery and the export all fold the same events through
``SessionState.apply``; resolution is pure (``game_logic.rounds.resolve`` with
``seeding.round_rng``), so replaying the log gives back every round exactly.
No Flask and no database here: events come in as (kind, body, decision_id).

Pacing rules (also in ``docs/server.md``):

- nothing can be decided before ``session_started``, while paused, or after the end;
- a group's round resolves as soon as every seat of the group has decided, or when
  the facilitator closes it (``round_closed``): seats that had not decided take 0,
  recorded with source ``console``;
- groups progress independently; when a group's block is over it waits until the
  facilitator opens its next block (``block_opened``);
- the session ends on ``session_ended``, or by itself once every group has
  played its last block;
- a paused group (``group_paused``) takes no decision from phones until
  ``group_resumed``; the console may still enter harvests for it;
- a correction (``harvest_corrected``) replaces a seat's decision only while its
  round is open; a resolved round never changes;
- a released seat (``seat_released``) forgets the devices that held it: only a
  device that presents the seat card again holds it afterwards;
- the field day's stages (consent, instructions, comprehension, questionnaires, risk
  task) are folded by ``game_logic.field_day``; practice rounds (``practice`` in the
  harvest) come first on their own stock and pay nothing; the group then waits for
  ``block_opened``; a seat left absent after a declined consent takes no harvest and
  a round resolves once every present seat has decided.
"""

from __future__ import annotations

import copy
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass, field, fields, replace
from typing import Any

from ebbtide.game_logic.field_day import FIELD_DAY_KINDS, FieldDay, practice_start, practice_study
from ebbtide.game_logic.rounds import (
    GroupState,
    RoundOutcome,
    check_block_open,
    check_harvest,
    next_block,
    resolve,
    start_block,
)
from ebbtide.game_logic.seeding import practice_round_rng, round_rng
from ebbtide.game_logic.study import Study

from .errors import Refused, RoundClosed, UnknownGroup, UnknownSeat

SOURCES = ("phone", "console", "bot")
# A seat with no decision when the facilitator closed its round: it takes 0, but nobody asked for 0.
CLOSED = "closed"
# Events that only record what replay derives anyway (kept for people reading the log).
AUDIT_KINDS = frozenset({"session_created", "round_resolved"})
GROUP_KINDS = frozenset({"group_paused", "group_resumed"})


@dataclass(frozen=True)
class Decision:
    """One seat's stored harvest for an open round."""

    harvest: int
    source: str
    decision_id: str | None
    event_id: int | None = None  # the event a correction must name to supersede this one
    language: str = ""  # the phone's language when it sent the decision
    pictures: bool | None = None  # whether the phone was in pictures mode


@dataclass(frozen=True)
class DecisionTiming:
    """When a decision of a resolved round was stored, by event id (the shell has the times)."""

    opened_event: int  # the event that opened the round
    decision_events: tuple[int | None, ...]  # per seat; None for a seat that never decided
    languages: tuple[str, ...]
    pictures: tuple[bool | None, ...]


@dataclass(frozen=True)
class Receipt:
    """Where a decision id was counted, so a resend is acknowledged the same way."""

    group: int
    seat: int
    block: int
    round: int
    harvest: int


class Receipts(Mapping[str, Receipt]):
    """Every decision id counted so far, shared between versions without copying them all.

    A fork shares the settled receipts and copies only the recent ones; the recent ones
    are settled into a new shared dict once they outnumber the square root of the
    settled ones, so a fork costs about the square root of the session's decisions
    instead of all of them. Receipts are only ever added, never changed.
    """

    __slots__ = ("_settled", "_recent")

    def __init__(self, settled: dict[str, Receipt] | None = None, recent: dict[str, Receipt] | None = None):
        self._settled = settled if settled is not None else {}
        self._recent = recent if recent is not None else {}

    def __getitem__(self, decision_id: str) -> Receipt:
        receipt = self._recent.get(decision_id)
        return receipt if receipt is not None else self._settled[decision_id]

    def __contains__(self, decision_id: object) -> bool:
        return decision_id in self._recent or decision_id in self._settled

    def __iter__(self) -> Iterator[str]:
        yield from self._settled
        yield from self._recent

    def __len__(self) -> int:
        return len(self._settled) + len(self._recent)

    def __setitem__(self, decision_id: str, receipt: Receipt) -> None:
        self._recent[decision_id] = receipt

    def fork(self) -> Receipts:
        if len(self._recent) ** 2 > max(len(self._settled), 1024):
            return Receipts({**self._settled, **self._recent})
        return Receipts(self._settled, dict(self._recent))


@dataclass
class GroupProgress:
    """One group's state between events."""

    state: GroupState
    outcomes: list[RoundOutcome] = field(default_factory=list)
    sources: list[tuple[str, ...]] = field(default_factory=list)
    pending: dict[int, Decision] = field(default_factory=dict)
    units: list[int] = field(default_factory=list)  # whole units each seat took so far: the money record
    waiting: bool = False  # block over, next block not yet opened by the facilitator
    paused: bool = False  # phones of this group wait; the console may still enter harvests
    practice: GroupState | None = None  # the practice stock while the group practises
    practice_outcomes: list[RoundOutcome] = field(default_factory=list)
    practice_sources: list[tuple[str, ...]] = field(default_factory=list)
    timings: list[DecisionTiming] = field(default_factory=list)  # one per outcome, in order
    practice_timings: list[DecisionTiming] = field(default_factory=list)
    opened_event: int = 0  # the event that opened the current round

    @property
    def playing(self) -> GroupState:
        """The stock being played now: the practice stock while practising."""
        return self.practice if self.practice is not None else self.state

    @property
    def last_outcome(self) -> RoundOutcome | None:
        if self.outcomes and self.outcomes[-1].block == self.state.block:
            return self.outcomes[-1]
        return None


@dataclass
class SessionState:
    """A whole session as rebuilt from its log."""

    study: Study
    seed: int
    session_id: str
    status: str = "setup"  # setup | running | paused | ended
    groups: list[GroupProgress] = field(default_factory=list)
    devices: dict[tuple[int, int], list[str]] = field(default_factory=dict)  # holders since the last release
    released: set[tuple[int, int]] = field(default_factory=set)
    receipts: Receipts = field(default_factory=lambda: Receipts())
    seq: int = 0
    debrief_revealed: bool = False  # the facilitator showed the debrief to participants
    day: FieldDay | None = None  # consent, instructions, questionnaires, ... (field_day.py)

    @classmethod
    def new(cls, study: Study, seed: int, session_id: str) -> SessionState:
        groups = [
            GroupProgress(start_block(study, seed, g, 0), units=[0] * study.seats)
            for g in range(study.groups.count)
        ]
        if study.practice.rounds:
            for g, progress in enumerate(groups):
                progress.practice = practice_start(study, seed, g)
        return cls(study=study, seed=seed, session_id=session_id, groups=groups,
                   day=FieldDay.new(study, seed))

    def game_over(self, g: int) -> bool:
        return self.status == "ended" or self.groups[g].state.session_over

    def seat_stage(self, g: int, seat: int) -> str:
        """Where seat ``seat`` of group ``g`` stands in the day (``field_day.STAGES``)."""
        return self.day.seat_stage(g, seat, self.game_over(g))

    def present_seats(self, g: int) -> list[int]:
        return [s for s in range(self.study.seats) if not self.day.absent(g, s)]

    def fork(self) -> SessionState:
        """A copy to fold the next events into, leaving this version exactly as it is.

        Copy-on-write: the live server folds accepted events into a fork and
        publishes it whole, so a reader holding a version never sees it change.
        What the fork shares with this version is copied only when the fork first
        changes it: a group's progress (``_changing_group``), the device lists
        (``_changing_devices``), the receipts (``Receipts.fork``) and the field day
        (``FieldDay.fork``). So one decision costs the same with 2 groups or 200,
        however many rounds were played. What the containers hold is frozen
        (outcomes, decisions, receipts, group states) or replaced, never changed.
        """
        forked = object.__new__(SessionState)
        forked.__dict__.update(self.__dict__)
        forked.groups = list(self.groups)
        forked._own_groups = set()
        forked._devices_shared = True
        forked.receipts = self.receipts.fork()
        if self.day is not None:
            forked.day = self.day.fork()
        return forked

    def _changing_group(self, g: int) -> GroupProgress:
        """Group ``g``'s progress, safe to change in this version (copied once if shared)."""
        own = self.__dict__.get("_own_groups")
        if own is not None and g not in own:
            self.groups[g] = _with_fresh_containers(self.groups[g])
            own.add(g)
        return self.groups[g]

    def _changing_devices(self) -> None:
        """Copy the device lists and releases before this version first changes them."""
        if self.__dict__.get("_devices_shared"):
            self.devices, self.released = dict(self.devices), set(self.released)
            self._devices_shared = False

    # -- checks (raise Refused, change nothing) -------------------------------

    def group(self, group: int) -> GroupProgress:
        """The one group range check (``group`` 0-based): the group's progress, else ``UnknownGroup``."""
        if isinstance(group, bool) or not isinstance(group, int) or not 0 <= group < len(self.groups):
            shown = group + 1 if isinstance(group, int) else repr(group)
            raise UnknownGroup(f"group {shown} does not exist; allowed: 1..{len(self.groups)}")
        return self.groups[group]

    def open_round(self, group: int) -> GroupProgress:
        """The one "is this group's round open" rule: its progress, else ``RoundClosed``.

        Open means: the session has started and not ended, and the group's block is
        still running (a paused session or group keeps its round open; whether a
        phone may decide in it is the harvest check's business).
        """
        progress = self.group(group)
        self._check_not_ended()
        if self.status == "setup":
            raise RoundClosed("not_started", "the session has not started yet; wait for the facilitator")
        if progress.practice is not None and progress.practice.block_over:
            raise RoundClosed("block_over", f"the practice rounds are over for group {group + 1}; "
                              "wait for the paid game")
        check_block_open(progress.playing)  # the practice stock while the group practises
        return progress

    def _check_not_ended(self) -> None:
        if self.status == "ended":
            raise RoundClosed("session_over", "the session has ended; it is kept to read, pay and export, "
                              "and nothing more can be played in it")

    def round_is_open(self, group: int) -> bool:
        try:
            self.open_round(group)
        except RoundClosed:
            return False
        return True

    def check(self, kind: str, body: dict[str, Any]) -> None:
        """Raise ``Refused`` if the event cannot happen now."""
        if kind == "session_started":
            if self.status != "setup":
                raise Refused("already_started", f"the session is already {self.status}")
        elif kind == "session_paused":
            if self.status != "running":
                raise Refused("not_running", f"only a running session can be paused; it is {self.status}")
        elif kind == "session_resumed":
            if self.status != "paused":
                raise Refused("not_paused", f"only a paused session can be resumed; it is {self.status}")
        elif kind == "session_ended":
            self._check_not_ended()
        elif kind == "seat_claimed":
            self.group(body["group"])
        elif kind == "seat_released":
            self._check_seat(body["seat"])
            self.group(body["group"])
            if not self.devices.get((body["group"], body["seat"])):
                raise Refused("not_claimed", f"seat {body['seat'] + 1} of group {body['group'] + 1} "
                              "is not held by any device; nothing to release")
        elif kind in GROUP_KINDS:
            progress = self.group(body["group"])
            self._check_not_ended()
            wanted = kind == "group_paused"
            if progress.paused == wanted:
                word = "paused" if wanted else "playing"
                raise Refused(f"already_{word}", f"group {body['group'] + 1} is already {word}")
        elif kind == "harvest_submitted":
            self._check_harvest(body)
        elif kind == "harvest_corrected":
            self._check_correction(body)
        elif kind == "round_closed":
            self._check_open_round(body, decided_ok=True)
        elif kind == "block_opened":
            progress = self.group(body["group"])
            self._check_not_ended()
            if not progress.waiting:
                raise Refused(
                    "block_running",
                    f"group {body['group'] + 1} is still playing block {progress.state.block + 1}",
                )
        elif kind == "debrief_revealed":
            self._check_reveal()
        elif kind in FIELD_DAY_KINDS:
            group = body.get("group")
            self.group(group if isinstance(group, int) else -1)
            self.day.check(kind, body, self.game_over(group))
        elif kind not in AUDIT_KINDS:
            raise Refused("unknown_event", f"unknown event {kind!r}")

    def _check_reveal(self) -> None:
        # Only after play: a threshold revealed before a later block would change its treatment.
        if self.status != "ended":
            raise Refused(
                "session_running",
                f"the session is {self.status}; the debrief can be revealed to participants "
                "only after the session has ended",
            )
        if self.debrief_revealed:
            raise Refused("already_revealed", "the debrief has already been revealed to participants")

    def _check_open_round(self, body: dict[str, Any], decided_ok: bool) -> GroupProgress:
        progress = self.group(body["group"])
        practising = progress.practice is not None
        # Phones always say which they mean, so a late practice decision never counts as paid play.
        if "practice" in body and bool(body["practice"]) != practising:
            word = "practice rounds" if practising else "the paid game"
            raise RoundClosed("wrong_round", f"group {body['group'] + 1} is playing {word} now")
        self.open_round(body["group"])
        state = progress.playing
        current = (state.block + 1, state.round + 1)
        asked_for = (body["block"], body["round"])
        if asked_for < current:
            raise RoundClosed(
                "round_resolved",
                f"block {asked_for[0]}, round {asked_for[1]} is already resolved and cannot change; "
                f"the open round is block {current[0]}, round {current[1]}",
            )
        if asked_for != current:
            raise RoundClosed(
                "wrong_round",
                f"block {asked_for[0]}, round {asked_for[1]} is not open yet; "
                f"the open round is block {current[0]}, round {current[1]}",
            )
        return progress

    def _check_seat(self, seat: int) -> None:
        if isinstance(seat, bool) or not isinstance(seat, int) or not 0 <= seat < self.study.seats:
            shown = seat + 1 if isinstance(seat, int) else repr(seat)
            raise UnknownSeat(f"seat {shown} does not exist; allowed: 1..{self.study.seats}")

    def _check_harvest(self, body: dict[str, Any]) -> None:
        progress = self._check_open_round(body, decided_ok=False)
        if self.status == "paused":
            raise Refused("paused", "the session is paused; wait until the facilitator resumes it")
        if body["source"] not in SOURCES:
            raise Refused("bad_request", f"source {body['source']!r}; allowed: {', '.join(SOURCES)}")
        if progress.paused and body["source"] != "console":
            raise Refused("group_paused", "your group is paused; wait until the facilitator resumes it")
        seat = body["seat"]
        self._check_seat(seat)
        check_harvest(self.study, seat, body["harvest"])
        if self.day.absent(body["group"], seat):
            raise Refused("seat_absent", f"seat {seat + 1} did not agree to take part; it plays no round")
        if body["source"] != "console" and not self.day.consented(body["group"], seat):
            raise Refused("no_consent",
                          f"seat {seat + 1} has not agreed to take part yet; consent comes first")
        if seat in progress.pending:
            raise Refused(
                "already_decided",
                f"seat {seat + 1} has already decided in this round "
                f"({progress.pending[seat].harvest}); a wrong entry is fixed with a correction",
            )

    def _check_correction(self, body: dict[str, Any]) -> None:
        progress = self._check_open_round(body, decided_ok=True)
        seat = body["seat"]
        self._check_seat(seat)
        check_harvest(self.study, seat, body["harvest"])
        current = progress.pending.get(seat)
        if current is None:
            raise Refused(
                "nothing_to_correct",
                f"seat {seat + 1} has not decided in this round; enter its harvest instead",
            )
        if current.event_id != body["supersedes"]:
            raise Refused(
                "stale_entry",
                f"entry {body['supersedes']} is not the current entry of seat {seat + 1} "
                f"(that is entry {current.event_id}: {current.harvest}); look again and retry",
            )

    # -- applying (events already checked or read back from the log) ----------

    def apply(self, kind: str, body: dict[str, Any], decision_id: str | None, seq: int) -> list[RoundOutcome]:
        """Fold one event into the state; returns the rounds it resolved."""
        self.seq = seq
        resolved: list[RoundOutcome] = []
        if kind == "harvest_corrected":
            g, seat = body["group"], body["seat"]
            self._changing_group(g).pending[seat] = Decision(body["harvest"], "console", decision_id, seq)
            if decision_id is not None:
                self.receipts[decision_id] = Receipt(g, seat, body["block"], body["round"], body["harvest"])
            return resolved
        if kind in GROUP_KINDS:
            self._changing_group(body["group"]).paused = kind == "group_paused"
            return resolved
        if kind == "seat_released":
            self._changing_devices()
            self.devices[(body["group"], body["seat"])] = []
            self.released.add((body["group"], body["seat"]))
            return resolved
        if kind in FIELD_DAY_KINDS:
            self.day.apply(kind, body, seq)
            return resolved
        if kind == "session_started":
            self.status = "running"
            for g in range(len(self.groups)):
                self._changing_group(g).opened_event = seq
        elif kind == "session_paused":
            self.status = "paused"
        elif kind == "session_resumed":
            self.status = "running"
        elif kind == "session_ended":
            self.status = "ended"
        elif kind == "seat_claimed":
            devices = self.devices.get((body["group"], body["seat"]), [])
            if body["device"] not in devices:  # a new list: a published version's list never changes
                self._changing_devices()
                self.devices[(body["group"], body["seat"])] = [*devices, body["device"]]
        elif kind == "harvest_submitted":
            g, seat = body["group"], body["seat"]
            progress = self._changing_group(g)
            progress.pending[seat] = Decision(body["harvest"], body["source"], decision_id, seq,
                                              body.get("language", ""), body.get("pictures"))
            if decision_id is not None:
                self.receipts[decision_id] = Receipt(g, seat, body["block"], body["round"], body["harvest"])
            if set(progress.pending) >= set(self.present_seats(g)):
                resolved.append(self._resolve(g))
        elif kind == "round_closed":
            resolved.append(self._resolve(body["group"]))
        elif kind == "block_opened":
            progress = self._changing_group(body["group"])
            if progress.practice is not None:
                progress.practice = None  # practice over: the paid game's first block begins
            else:
                progress.state = next_block(self.study, self.seed, progress.state)
            progress.waiting = False
            progress.opened_event = seq
        elif kind == "debrief_revealed":
            self.debrief_revealed = True
        return resolved

    def _resolve(self, g: int) -> RoundOutcome:
        progress = self._changing_group(g)
        state = progress.playing
        seats = range(self.study.seats)
        missing = Decision(0, CLOSED, None)
        absent = Decision(0, "absent", None)
        decisions = [absent if self.day.absent(g, s) else progress.pending.get(s, missing) for s in seats]
        timing = DecisionTiming(
            progress.opened_event, tuple(d.event_id for d in decisions),
            tuple(d.language for d in decisions), tuple(d.pictures for d in decisions),
        )
        progress.opened_event = self.seq
        progress.pending = {}
        if progress.practice is not None:
            # Practice: its own stock and draws; nothing is added to anyone's units.
            rng = practice_round_rng(self.seed, g, state.round + 1)
            harvests = [d.harvest for d in decisions]
            new_state, outcome = resolve(practice_study(self.study), state, harvests, rng)
            progress.practice = new_state
            progress.practice_outcomes.append(outcome)
            progress.practice_sources.append(tuple(d.source for d in decisions))
            progress.practice_timings.append(timing)
            progress.waiting = new_state.block_over
            return outcome
        rng = round_rng(self.seed, g, state.block, state.round + 1)
        new_state, outcome = resolve(self.study, state, [d.harvest for d in decisions], rng)
        progress.state = new_state
        progress.outcomes.append(outcome)
        progress.sources.append(tuple(d.source for d in decisions))
        progress.timings.append(timing)
        for s in seats:
            progress.units[s] += outcome.taken[s]
        progress.waiting = new_state.block_over and not new_state.session_over
        if all(p.state.session_over for p in self.groups):
            self.status = "ended"
        return outcome

    # -- reading -------------------------------------------------------------

    def outcomes(self) -> list[tuple[RoundOutcome, tuple[str, ...]]]:
        """Every resolved round with each seat's source, group by group, in play order."""
        return [
            (outcome, sources)
            for progress in self.groups
            for outcome, sources in zip(progress.outcomes, progress.sources, strict=True)
        ]


def _with_fresh_containers(obj: Any) -> Any:
    fresh = {f.name: copy.copy(value) for f in fields(obj)
             if isinstance(value := getattr(obj, f.name), (list, dict, set))}
    return replace(obj, **fresh)


def replay(study: Study, seed: int, session_id: str, events: Iterable[Any]) -> SessionState:
    """Fold stored events (objects with kind, body, decision_id, id) into a fresh state."""
    state = SessionState.new(study, seed, session_id)
    for event in events:
        state.apply(event.kind, event.body, event.decision_id, event.id)
    return state
