"""The shape of every socket message a client may send, checked at the edge.

Each model forbids unknown fields and bounds every size and range, so a handler
only ever sees a well-formed request. Range checks that depend on the study
(the harvest cap, the number of groups) are made by the replayed state.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field, StringConstraints, ValidationError

from ebbtide.game_logic.errors import Refused

SeatSecret = Annotated[str, StringConstraints(pattern=r"^[A-Za-z0-9_-]{16,64}$")]
ClientId = Annotated[str, StringConstraints(pattern=r"^[A-Za-z0-9_-]{8,64}$")]
Count = Annotated[int, Field(ge=1, le=1000)]
GroupNumber = Annotated[int, Field(ge=1, le=200)]  # the cap of GroupsSpec.count
SeatNumber = Annotated[int, Field(ge=1, le=100)]
Harvest = Annotated[int, Field(ge=0, le=1000)]
EntryId = Annotated[int, Field(ge=1, le=2**62)]
# Who typed a console entry (initials), kept in the event log; blank means "console".
LanguageCode = Annotated[str, StringConstraints(pattern=r"^[a-z]{2,3}([_-][A-Za-z0-9]{2,8})?$")]
ItemId = Annotated[str, StringConstraints(pattern=r"^[a-z0-9][a-z0-9_-]{0,31}$")]
StepNumber = Annotated[int, Field(ge=0, le=30)]
Operator = Annotated[str, StringConstraints(pattern=r"^[A-Za-z0-9 .'-]{0,24}$")]


class _Message(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


class PhoneAuth(_Message):
    """The ``auth`` payload a phone sends on every (re)connect."""

    secret: SeatSecret
    device: ClientId
    agent: Literal["phone", "bot"] = "phone"
    # Only the rehearsal command knows this (console/access.py ``rehearsal_token``); a bot needs it.
    rehearsal: Annotated[str, StringConstraints(pattern=r"^[0-9a-f]{40}$")] | None = None
    # True when the secret came from the seat card just now (its link), not from storage:
    # only such a device may take back a seat the facilitator released.
    fresh: bool = False
    # The person confirmed taking the seat over from another phone that holds it now.
    take_over: bool = False


class ConsoleAuth(_Message):
    """The console's ``auth`` payload; the signed session cookie carries the proof."""

    role: Literal["console"]


class HarvestRequest(_Message):
    """A seat's harvest for one round; ``decision_id`` is made by the client, once per choice."""

    decision_id: ClientId
    block: Count
    round: Count
    harvest: Harvest
    # Optional, 1-based: a phone that names a seat must name its own.
    group: GroupNumber | None = None
    seat: SeatNumber | None = None
    # Which stock the phone was showing (practice rounds pay nothing), its language and mode:
    # stored with the decision for the export.
    practice: bool = False
    language: LanguageCode | None = None
    pictures: bool | None = None


class ConsentAnswer(_Message):
    """A person's answer to the consent text, with the language and hash of the text shown."""

    agree: bool
    language: LanguageCode
    text_sha256: Annotated[str, StringConstraints(pattern=r"^[0-9a-f]{64}$")]


class InstructionStepRequest(_Message):
    """The instruction step a phone moves to (0-based; the count of steps means done)."""

    step: StepNumber


class ComprehensionAnswer(_Message):
    question: ItemId
    choice: Annotated[int, Field(ge=1, le=12)]


class SurveyAnswer(_Message):
    """One questionnaire answer: a choice number, choice numbers, a number or text."""

    questionnaire: ItemId
    item: ItemId
    answer: Annotated[int, Field(ge=-(10**9), le=10**9)] | Annotated[
        list[Annotated[int, Field(ge=1, le=12)]], Field(max_length=12)
    ] | Annotated[str, StringConstraints(max_length=1000)]


class RiskChoice(_Message):
    gamble: Annotated[int, Field(ge=1, le=8)]


class GroupStep(_Message):
    """Facilitator: show instruction step ``step`` (1-based; steps + 1 = done) on a group's phones."""

    group: GroupNumber
    step: Annotated[int, Field(ge=1, le=31)]


class GroupTarget(_Message):
    """A facilitator action on one group (1-based), or on every group when ``group`` is None."""

    group: GroupNumber | None = None


class GroupAction(_Message):
    """A facilitator action on exactly one group (pause, resume)."""

    group: GroupNumber
    by: Operator = ""


class SeatAction(_Message):
    """A facilitator action on one seat (release it)."""

    group: GroupNumber
    seat: SeatNumber
    by: Operator = ""


class ConsoleHarvest(_Message):
    """A harvest the facilitator enters for a seat whose phone cannot (source ``console``)."""

    decision_id: ClientId
    group: GroupNumber
    seat: SeatNumber
    block: Count
    round: Count
    harvest: Harvest
    by: Operator = ""


class ConsoleCorrection(ConsoleHarvest):
    """A new entry that supersedes the seat's current entry of the open round."""

    supersedes: EntryId


class PaperSlips(_Message):
    """Every seat's harvest of one round, typed from paper slips; ``None`` leaves a seat as it is."""

    batch_id: Annotated[str, StringConstraints(pattern=r"^[A-Za-z0-9_-]{8,48}$")]
    group: GroupNumber
    block: Count
    round: Count
    harvests: Annotated[list[Harvest | None], Field(min_length=1, max_length=100)]
    by: Operator = ""


class Empty(_Message):
    """A facilitator action that takes no arguments."""


def from_validation_error(exc: ValidationError) -> Refused:
    """Turn pydantic's report on a bad socket payload into one readable refusal."""
    parts = []
    for error in exc.errors():
        key = ".".join(str(p) for p in error["loc"]) or "payload"
        if error["type"] == "extra_forbidden":
            parts.append(f"{key}: unknown field")
        elif error["type"] == "missing":
            parts.append(f"{key}: required field is missing")
        else:
            parts.append(f"{key}: {error['msg']}")
    return Refused("bad_request", "; ".join(parts))
