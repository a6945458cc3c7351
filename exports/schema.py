"""The export contract: tables, columns, types, units and meanings.

Live sessions, the rehearsal bots and the offline pilot all write these tables,
so the analysis reads them the same way. Column names and meanings in
``CONTRACT`` never change; new columns may be added at the end.
Types are Table Schema types (Frictionless Data Package standard).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ebbtide.game_logic.study import TREATMENTS

SOURCES = ("phone", "console", "bot", "pilot", "closed")
REGIMES = ("good", "degraded")


@dataclass(frozen=True)
class Column:
    """One column: Table Schema type, meaning, unit and constraints (``minimum``, ``enum``, ``required``)."""

    name: str
    type: str
    description: str
    unit: str = ""
    constraints: dict = field(default_factory=dict, hash=False, compare=False)


_REQUIRED = {"required": True}
_COUNT = {"required": True, "minimum": 0}
_SESSION = Column("session_id", "string", "Session identifier, unique across pooled exports", "", _REQUIRED)
_GROUP = Column("group_id", "string", "Group identifier within the session", "", _REQUIRED)
_SEAT = Column("seat_id", "string", "Seat code (anonymous; never a name)", "", _REQUIRED)
_BLOCK = Column("block", "integer", "Block number, 1-based, in the order played", "",
                {"required": True, "minimum": 1})
_TREATMENT = Column(
    "treatment", "string", "Information treatment of the block: none, vague, range, exact, risk, signal", "",
    {"required": True, "enum": list(TREATMENTS)},
)
_ROUND = Column("round", "integer", "Round number within the block, 1-based", "",
                {"required": True, "minimum": 1})
_STOCK_BEFORE = Column("stock_before", "integer", "Stock at the start of the round", "units", _COUNT)
_REGIME = {"required": True, "enum": list(REGIMES)}

DECISIONS = (
    _SESSION,
    _GROUP,
    _SEAT,
    _BLOCK,
    _TREATMENT,
    _ROUND,
    _STOCK_BEFORE,
    Column("harvest_asked", "integer", "Harvest the seat asked for; empty when no choice reached the laptop "
           "before the facilitator closed the round (source closed)", "units", {"minimum": 0}),
    Column("harvest_taken", "integer", "Harvest the seat received after rationing", "units", _COUNT),
    Column("points", "number", "Points earned in the round", "points", _COUNT),
    Column("source", "string", "Who entered the decision: phone, console, bot or pilot; closed when the "
           "facilitator closed the round before the seat decided (it took 0)", "",
           {"required": True, "enum": list(SOURCES)}),
)

ROUNDS = (
    _SESSION,
    _GROUP,
    _BLOCK,
    _TREATMENT,
    _ROUND,
    _STOCK_BEFORE,
    Column("total_taken", "integer", "Sum of harvests taken by the group", "units", _COUNT),
    Column("remaining", "integer", "Stock left after the harvest, before regrowth", "units", _COUNT),
    Column("stock_after", "integer", "Stock after regrowth, start of the next round", "units", _COUNT),
    Column("regime_after", "string", "Regime after the round: good or degraded", "", _REGIME),
    Column("threshold", "number", "Hidden threshold of the group (empty when none)", "units", {"minimum": 0}),
    Column("crossed", "boolean", "1 when the regime flipped from good to degraded this round, else 0 "
           "(see below_threshold)", "", _REQUIRED),
    Column("regime_before", "string", "Regime at the start of the round: good or degraded", "", _REGIME),
    Column("recovered", "boolean", "1 when the stock returned to the good regime this round, else 0", "",
           _REQUIRED),
    Column("regrowth", "integer", "stock_after minus remaining", "units", _REQUIRED),
    Column("block_name", "string", "Name of the block in the study file"),
    Column("talk", "boolean", "1 when the block allowed a discussion pause before each round, else 0", "",
           _REQUIRED),
    Column("show_others", "boolean", "1 when individual harvests were shown after each round, else 0", "",
           _REQUIRED),
    Column("end_reason", "string", "Why the block ended after this round (empty if it went on)"),
    Column(
        "below_threshold",
        "boolean",
        "1 when the stock left after the harvest (remaining) lay below the threshold, whether "
        "or not the regime flipped (risk treatment, or already degraded); 0 without a threshold",
        "",
        _REQUIRED,
    ),
)

SEATS = (
    _SESSION,
    _GROUP,
    _SEAT,
    Column("points_total", "number", "Points over the whole session", "points", _COUNT),
    Column(
        "payment",
        "number",
        "Cash due, show-up fee included, rounded up to the smallest denomination",
        "currency",
        _COUNT,
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

# Rows that identify one another across tables (Table Schema primaryKey / foreignKeys).
PRIMARY_KEYS = {
    "decisions": ["session_id", "group_id", "seat_id", "block", "round"],
    "rounds": ["session_id", "group_id", "block", "round"],
    "seats": ["session_id", "group_id", "seat_id"],
}
FOREIGN_KEYS = {
    "decisions": [
        {"fields": ["session_id", "group_id", "block", "round"],
         "reference": {"resource": "rounds", "fields": ["session_id", "group_id", "block", "round"]}},
        {"fields": ["session_id", "group_id", "seat_id"],
         "reference": {"resource": "seats", "fields": ["session_id", "group_id", "seat_id"]}},
    ],
    "rounds": [],
    "seats": [],
}
# How booleans are written in the CSV files (0/1 read as numbers by R, Stata and spreadsheets).
TRUE_VALUES, FALSE_VALUES = ["1"], ["0"]
BOOLEAN_LABELS = {0: "no", 1: "yes"}
