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
    Column("harvest_asked", "integer", "Harvest the seat asked for", "units"),
    Column("harvest_taken", "integer", "Harvest the seat received after rationing", "units"),
    Column("points", "number", "Points earned in the round", "points"),
    Column("source", "string", "Who entered the decision: phone, console, bot or pilot; "
           "absent for a seat whose person did not agree to take part (no harvest)"),
    Column("stored_at", "datetime", "When the decision was stored on the laptop (UTC; empty in a pilot)"),
    Column("seconds_from_open", "number",
           "Seconds from the event that opened the round to the stored decision (empty in a pilot)", "s"),
    Column("language", "string", "Language of the phone when it sent the decision (empty if not a phone)"),
    Column("pictures", "boolean", "Whether the phone showed pictures instead of words (empty if unknown)"),
    Column("practice", "boolean", "True for unpaid practice rounds, played on their own stock"),
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
    Column("crossed", "boolean", "True when the stock flipped from good to degraded this round"),
    Column("regime_before", "string", "Regime at the start of the round: good or degraded"),
    Column("recovered", "boolean", "True when the stock returned to the good regime this round"),
    Column("regrowth", "integer", "stock_after minus remaining", "units"),
    Column("block_name", "string", "Name of the block in the study file"),
    Column("talk", "boolean", "Whether the block allowed a discussion pause before each round"),
    Column("show_others", "boolean", "Whether individual harvests were shown after each round"),
    Column("end_reason", "string", "Why the block ended after this round (empty if it went on)"),
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
    Column("consent", "string", "Consent of the seat's latest person: given, declined or empty (not asked)"),
    Column("risk_gamble", "integer", "Gamble chosen in the risk task, 1-based (empty if none)"),
    Column("risk_outcome", "string", "Coin of the risk task: low or high (empty if none)"),
    Column("risk_points", "number", "Points paid by the risk task (0 when unpaid or none)", "points"),
    Column("risk_payment", "number", "Cash for the risk task, its own line, rounded up", "currency"),
    Column("declined_payment", "number",
           "Show-up fees of people at this seat who did not agree to take part", "currency"),
    Column("total_payment", "number", "Everything paid for this seat: payment + risk + declined", "currency"),
)

CONTRACT: dict[str, tuple[Column, ...]] = {
    "decisions": DECISIONS,
    "rounds": ROUNDS,
    "seats": SEATS,
}

# The columns every later issue relies on, in this order, at the start of each table.
REQUIRED = {
    "decisions": [c.name for c in DECISIONS[:11]],
    "rounds": [c.name for c in ROUNDS[:12]],
    "seats": [c.name for c in SEATS[:5]],
}
