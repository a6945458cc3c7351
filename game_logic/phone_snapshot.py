"""The one gate: every byte a phone receives as its screen state, as one validated model.

``phone_snapshot`` is the only function that builds what a participant's phone is
sent. It joins three things and nothing else:

- the treatment's ``participant_view`` (``treatments.py``), with the block's
  participant-facing label in the seat's language in place of any researcher's name;
- the group's part of a revealed debrief (``debrief.participant_debrief``), only after
  the facilitator revealed it;
- neutral UI state: the log position, the seat's language, the talk seconds left and
  the session's status as this seat should wait on it;
- the field day's screen of the seat (``field_day_view.field_day_screen``: consent,
  instructions, questions, questionnaires, risk task, end card) and, while its group
  practises, the practice stock in place of the paid one.

Pictures and sentences (the gauge, the debrief charts and sentences, the caution) are
words and drawings in the seat's language, so the shell draws them, through a
``SnapshotPainter`` that reads only the already validated parts of the model. Every model
refuses unknown keys and is frozen, so a field added anywhere without passing through
here fails loudly instead of reaching a phone.
"""

from __future__ import annotations

from decimal import Decimal
from typing import TYPE_CHECKING, Annotated, Any, Literal, Protocol

from pydantic import BaseModel, ConfigDict, Field, NonNegativeInt, PositiveInt

from .debrief import finished_outcomes, participant_debrief
from .early_warning import BANDS, TRENDS
from .field_day import practice_study
from .field_day_view import FieldDayScreen, field_day_screen
from .money import earnings
from .session_fold import CLOSED
from .treatments import participant_view

if TYPE_CHECKING:
    from .session_fold import SessionState

Count = NonNegativeInt
# Points may be binary floats today and exact decimals tomorrow; either travels as a number or text.
Points = Decimal | float
Band = Literal[BANDS]
Trend = Literal[TRENDS]
Reason = Literal["low_stock", "falling_fast", "slow_recovery"]
Status = Literal["setup", "running", "paused", "ended"]
BlockEnd = Literal["last round", "random stop", "exhausted"]  # rounds.advance's end reasons


class _Sealed(BaseModel):
    """Unknown keys refused, nothing changed after building."""

    model_config = ConfigDict(extra="forbid", frozen=True)


class NoDanger(_Sealed):
    kind: Literal["none"]


class VagueDanger(_Sealed):
    kind: Literal["vague"]


class RangeDanger(_Sealed):
    kind: Literal["range"]
    low: float
    high: float


class ExactDanger(_Sealed):
    kind: Literal["exact"]
    level: float


class RiskDanger(_Sealed):
    kind: Literal["risk"]
    level: float
    flip_probability: Annotated[float, Field(ge=0, le=1)]


class SignalDanger(_Sealed):
    """Words only: the reading's score and parts stay on the server."""

    kind: Literal["signal"]
    band: Band
    trend: Trend
    reasons: tuple[Reason, ...]


Danger = Annotated[
    NoDanger | VagueDanger | RangeDanger | ExactDanger | RiskDanger | SignalDanger,
    Field(discriminator="kind"),
]


class LastRound(_Sealed):
    """The seat's view of its group's latest resolved round in the current block."""

    round: PositiveInt
    asked: Count
    taken: Count
    points: Points
    group_total: Count
    remaining: Count
    regrowth: int
    stock_after: Count
    rationed: bool
    others: tuple[Count, ...] | None = None  # only when the block shows others' harvests


class PhoneView(_Sealed):
    """What the treatment lets this seat see (``treatments.participant_view``), labels resolved."""

    seat: PositiveInt
    seats: PositiveInt
    block: PositiveInt
    blocks: PositiveInt
    block_label: str | None = None  # the study's participant-facing label; None: the phone says "Part n"
    talk: bool
    talk_seconds: Count
    show_others: bool
    round: Count
    stock: Count
    capacity: PositiveInt
    max_harvest: PositiveInt
    unit: str
    points_total: Points
    block_over: bool
    # Why the block ended, once it has: "exhausted" and "random stop" end it before its length.
    block_end: BlockEnd | None = None
    session_over: bool
    danger: Danger
    rounds_in_block: PositiveInt | None = None
    continuation_probability: Annotated[float, Field(gt=0, lt=1)] | None = None
    last_round: LastRound | None = None
    practice: bool = False  # an unpaid practice round on the group's own practice stock


class WhatIfCut(_Sealed):
    less_by: PositiveInt
    crossed_round: PositiveInt | None = None


class DebriefFacts(_Sealed):
    """One finished block of the seat's own group, revealed (``debrief.participant_debrief``)."""

    part: PositiveInt
    label: str | None = None
    threshold: float | None = None
    recovery_level: float | None = None
    stock_path: tuple[Count, ...]
    degraded_rounds: tuple[PositiveInt, ...]
    total_taken: Count
    crossed_round: PositiveInt | None = None
    total_regrowth_lost: int
    what_ifs: tuple[WhatIfCut, ...]


class DebriefPart(DebriefFacts):
    """The facts plus what the shell drew from them: one sentence and one chart."""

    sentence: str
    svg: str


class PhoneDebrief(_Sealed):
    blocks: tuple[DebriefPart, ...]
    caution: str


class PhoneSnapshot(_Sealed):
    """Everything a phone receives as its screen state (the ``snapshot`` event and its re-asks)."""

    seq: Count
    language: Annotated[str, Field(pattern=r"^[a-z]{2,3}(_[A-Z]{2})?$")]
    # A paused group looks like a paused session to its phones: they wait.
    status: Status
    waiting_for_block: bool
    decided: bool
    my_harvest: Count | None = None
    # The facilitator closed the last round before this seat's choice reached the laptop.
    missed_last_round: bool = False
    talk_remaining: Annotated[float, Field(ge=0)] | None = None  # seconds; None outside talk blocks
    view: PhoneView
    # Cash so far (show-up fee included, ``money.earnings``), only where the study pays cash.
    cash_so_far: Decimal | None = None
    currency: str | None = None
    gauge_svg: str  # drawn from ``view`` only
    debrief: PhoneDebrief | None = None  # only after the facilitator's reveal
    field_day: FieldDayScreen | None = None  # the seat's stage of the day and only that stage's words

    def payload(self) -> dict[str, Any]:
        """The JSON sent to the phone.

        Keys the builder did not set are left out (a seat's ``others`` where the block hides
        them, ``last_round`` before the first round), while set ones stay, null included
        (``debrief`` is null until the reveal). Validating a payload and dumping it again
        gives the same payload.
        """
        return self.model_dump(mode="json", exclude_unset=True)


class SnapshotPainter(Protocol):
    """The shell's drawing, in the seat's language, from validated parts of the model only."""

    def gauge(self, view: PhoneView) -> str: ...

    def debrief_sentence(self, facts: DebriefFacts, unit: str) -> str: ...

    def debrief_chart(self, facts: DebriefFacts, capacity: int) -> str: ...

    def caution(self) -> str: ...


def phone_snapshot(
    state: SessionState,
    group: int,
    seat: int,
    *,
    language: str,
    talk_remaining: float | None,
    painter: SnapshotPainter,
) -> PhoneSnapshot:
    """Seat ``seat`` of group ``group`` (both 0-based): its whole screen state, validated."""
    study = state.study
    progress = state.groups[group]
    practising = progress.practice is not None
    if practising:
        # Practice: its own stock, rounds and points (which pay nothing).
        playing_study, playing = practice_study(study), progress.practice
        last = progress.practice_outcomes[-1] if progress.practice_outcomes else None
        units = sum(o.taken[seat] for o in progress.practice_outcomes)
        sources = progress.practice_sources
    else:
        playing_study, playing, last = study, progress.state, progress.last_outcome
        units, sources = progress.units[seat], progress.sources
    points = earnings(units, study.payment).points
    money = earnings(progress.units[seat], study.payment)  # cash so far: practice pays nothing
    raw_view = participant_view(playing_study, playing, seat, last, points)
    label = playing_study.block_label(playing.block, language)
    ended = playing.end_reason if playing.block_over else None
    view = PhoneView.model_validate({**raw_view, "block_label": label, "practice": practising,
                                     "unit": study.unit_label(language), "block_end": ended})
    pays_cash = study.payment.exchange_rate > 0
    debrief = None
    if state.debrief_revealed:
        outcomes = finished_outcomes(progress.outcomes, progress.state)
        parts = []
        for raw in participant_debrief(study, state.seed, outcomes, language):
            facts = DebriefFacts.model_validate(raw)
            parts.append(DebriefPart(
                **dict(facts),
                sentence=painter.debrief_sentence(facts, study.unit_label(language)),
                svg=painter.debrief_chart(facts, study.resource.capacity),
            ))
        debrief = PhoneDebrief(blocks=tuple(parts), caution=painter.caution())
    mine = progress.pending.get(seat)
    return PhoneSnapshot(
        seq=state.seq,
        language=language,
        status="paused" if progress.paused and state.status == "running" else state.status,
        waiting_for_block=progress.waiting,
        decided=mine is not None,
        my_harvest=None if mine is None else mine.harvest,
        missed_last_round=last is not None and sources[-1][seat] == CLOSED,
        talk_remaining=None if talk_remaining is None else round(talk_remaining, 1),
        view=view,
        cash_so_far=money.cash if pays_cash else None,
        currency=study.payment.currency if pays_cash else None,
        gauge_svg=painter.gauge(view),
        debrief=debrief,
        field_day=None if state.day is None else field_day_screen(state, group, seat, language),
    )
