"""The export contract: tables, columns, types, units and meanings.

Live sessions, the rehearsal bots and the offline pilot all write these tables,
so the analysis reads them the same way. Column names and meanings in
``CONTRACT`` never change; new columns may be added at the end.
Types are Table Schema types (Frictionless Data Package standard).
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Column:
    name: str
    type: str
    description: str
    unit: str = ""


_SESSION = Column("session_id", "string", "Session identifier, unique across pooled exports")
_GROUP = Column("group_id", "string", "Group identifier within the session")
_BLOCK = Column("block", "integer", "Block number, 1-based, in the order played")
_TREATMENT = Column(
    "treatment", "string", "Information treatment of the block: none, vague, range, exact, risk, signal"
)
_ROUND = Column("round", "integer", "Round number within the block, 1-based")
_STOCK_BEFORE = Column("stock_before", "integer", "Stock at the start of the round", "units")

DECISIONS = (
    _SESSION,
    _GROUP,
    Column("seat_id", "string", "Seat code (anonymous; never a name)"),
    _BLOCK,
    _TREATMENT,
    _ROUND,
    _STOCK_BEFORE,
    Column(
        "harvest_asked",
        "integer",
        "Harvest the seat asked for; empty when no choice reached the laptop before the facilitator "
        "closed the round (source closed)",
        "units",
    ),
    Column("harvest_taken", "integer", "Harvest the seat received after rationing", "units"),
    Column("points", "number", "Points earned in the round", "points"),
    Column(
        "source",
        "string",
        "Who entered the decision: phone, console, bot or pilot; closed when the facilitator closed "
        "the round before the seat decided (it took 0)",
    ),
)

ROUNDS = (
    _SESSION,
    _GROUP,
    _BLOCK,
    _TREATMENT,
    _ROUND,
    _STOCK_BEFORE,
    Column("total_taken", "integer", "Sum of harvests taken by the group", "units"),
    Column("remaining", "integer", "Stock left after the harvest, before regrowth", "units"),
    Column("stock_after", "integer", "Stock after regrowth, start of the next round", "units"),
    Column("regime_after", "string", "Regime after the round: good or degraded"),
    Column("threshold", "number", "Hidden threshold of the group (empty when none)", "units"),
    Column(
        "crossed",
        "boolean",
        "True when the regime flipped from good to degraded this round (see below_threshold)",
    ),
    Column("regime_before", "string", "Regime at the start of the round: good or degraded"),
    Column("recovered", "boolean", "True when the stock returned to the good regime this round"),
    Column("regrowth", "integer", "stock_after minus remaining", "units"),
    Column("block_name", "string", "Name of the block in the study file"),
    Column("talk", "boolean", "Whether the block allowed a discussion pause before each round"),
    Column("show_others", "boolean", "Whether individual harvests were shown after each round"),
    Column("end_reason", "string", "Why the block ended after this round (empty if it went on)"),
    Column(
        "below_threshold",
        "boolean",
        "True when the stock left after the harvest (remaining) lay below the threshold, whether "
        "or not the regime flipped (risk treatment, or already degraded); false without a threshold",
    ),
)

SEATS = (
    _SESSION,
    _GROUP,
    Column("seat_id", "string", "Seat code (anonymous; never a name)"),
    Column("points_total", "number", "Points over the whole session", "points"),
    Column(
        "payment",
        "number",
        "Cash due, show-up fee included, rounded up to the smallest denomination",
        "currency",
    ),
    Column("currency", "string", "Currency of the payment column"),
)

CONTRACT: dict[str, tuple[Column, ...]] = {
    "decisions": DECISIONS,
    "rounds": ROUNDS,
    "seats": SEATS,
}

# The columns every later issue relies on, in this order, at the start of each table.
REQUIRED = {
    "decisions": [c.name for c in DECISIONS],
    "rounds": [c.name for c in ROUNDS[:12]],
    "seats": [c.name for c in SEATS[:5]],
}
