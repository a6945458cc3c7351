"""The shape of every socket message a client may send, checked at the edge.

Each model forbids unknown fields and bounds every size and range, so a handler
only ever sees a well-formed request. Range checks that depend on the study
(the harvest cap, the number of groups) are made by the replayed state.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field, StringConstraints

SeatSecret = Annotated[str, StringConstraints(pattern=r"^[A-Za-z0-9_-]{16,64}$")]
ClientId = Annotated[str, StringConstraints(pattern=r"^[A-Za-z0-9_-]{8,64}$")]
Count = Annotated[int, Field(ge=1, le=1000)]


class _Message(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


class PhoneAuth(_Message):
    """The ``auth`` payload a phone sends on every (re)connect."""

    secret: SeatSecret
    device: ClientId
    agent: Literal["phone", "bot"] = "phone"


class ConsoleAuth(_Message):
    """The console's ``auth`` payload; the signed session cookie carries the proof."""

    role: Literal["console"]


class HarvestRequest(_Message):
    """A seat's harvest for one round; ``decision_id`` is made by the client, once per choice."""

    decision_id: ClientId
    block: Count
    round: Count
    harvest: Annotated[int, Field(ge=0, le=1000)]


class GroupTarget(_Message):
    """A facilitator action on one group (1-based), or on every group when ``group`` is None."""

    group: Annotated[int, Field(ge=1, le=100)] | None = None


class Empty(_Message):
    """A facilitator action that takes no arguments."""
