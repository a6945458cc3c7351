"""The export contract: tables, columns, types, units and meanings.

Live sessions, the rehearsal bots and the offline pilot all write these tables,
so the analysis reads them the same way. Column names and meanings in
``CONTRACT`` never change; new columns may be added at the end.
Types are Table Schema types (Frictionless Data Package standard).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ebbtide.game_logic.study import TREATMENTS

# closed: the facilitator closed the round first; absent: the person did not agree to take part.
SOURCES = ("phone", "console", "bot", "pilot", "closed", "absent")
RISK_OUTCOMES = ("low", "high")
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
           "before the facilitator closed the round (source closed) or the seat was absent", "units",
           {"minimum": 0}),
    Column("harvest_taken", "integer", "Harvest the seat received after rationing (empty for an absent seat)",
           "units", {"minimum": 0}),
    Column("points", "number", "Points earned in the round (empty for an absent seat)", "points",
           {"minimum": 0}),
    Column("source", "string", "Who entered the decision: phone, console, bot or pilot; closed when the "
           "facilitator closed the round before the seat decided (it took 0); absent for a seat whose "
           "person did not agree to take part (no harvest)", "",
           {"required": True, "enum": list(SOURCES)}),
    Column("stored_at", "datetime", "When the decision was stored on the laptop (UTC; empty in a pilot)"),
    Column("seconds_from_open", "number",
           "Seconds from the event that opened the round to the stored decision (empty in a pilot)", "s",
           {"minimum": 0}),
    Column("language", "string", "Language of the phone when it sent the decision (empty if not a phone)"),
    Column("pictures", "boolean", "1 when the phone showed pictures instead of words, 0 when words "
           "(empty if unknown)"),
    Column("practice", "boolean", "1 for unpaid practice rounds, played on their own stock, else 0", "",
           _REQUIRED),
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
    Column("practice", "boolean", "1 for an unpaid practice round on the group's own practice stock "
           "(block_name practice), else 0", "", _REQUIRED),
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
    Column("consent", "string", "Consent of the seat's latest person: given, declined or empty (not asked)",
           "", {"enum": ["given", "declined"]}),
    Column("risk_gamble", "integer", "Gamble chosen in the risk task, 1-based (empty if none)", "",
           {"minimum": 1}),
    Column("risk_outcome", "string", "Coin of the risk task: low or high (empty if none)", "",
           {"enum": list(RISK_OUTCOMES)}),
    Column("risk_points", "number", "Points paid by the risk task (0 when unpaid or none)", "points", _COUNT),
    Column("risk_payment", "number", "Cash for the risk task, its own line, rounded up", "currency", _COUNT),
    Column("declined_payment", "number",
           "Show-up fees of people at this seat who did not agree to take part", "currency", _COUNT),
    Column("total_payment", "number", "Everything paid for this seat: payment + risk + declined", "currency",
           _COUNT),
)

# The field day's own tables, written by live sessions only (exports/field_day.py fills them).
_EVENT_ID = {"required": True, "minimum": 1}  # SQLite row ids start at 1
SURVEYS = (
    _SESSION,
    _GROUP,
    _SEAT,
    Column("questionnaire", "string",
           "Questionnaire id from the study; 'consent', 'comprehension' and 'risk_task' for those steps", "",
           _REQUIRED),
    Column("item", "string", "Item id (question id for comprehension; 'consent' and 'gamble' otherwise)", "",
           _REQUIRED),
    Column("answer", "string",
           "The answer: a choice number, choice numbers joined by ';', a whole number, 1-5 on the "
           "agree-disagree scale, free text; agree or decline for consent"),
    Column("time", "datetime", "When the answer was stored on the laptop (UTC)"),
    Column("event_id", "integer", "Id of the answer in the session's event log", "", _EVENT_ID),
    Column("attempt", "integer", "Comprehension only: 1 for the first try, 2 for the second, ...", "",
           {"minimum": 1}),
    Column("correct", "boolean", "Comprehension only: 1 when the answer was right, else 0"),
    Column("language", "string", "Consent only: the language of the text shown"),
    Column("text_sha256", "string", "Consent only: SHA-256 of the consent text shown (UTF-8)", "",
           {"pattern": "[0-9a-f]{64}"}),
    Column("outcome", "string", "Risk task only: the coin, low or high", "", {"enum": list(RISK_OUTCOMES)}),
)

TIMELINE = (
    _SESSION,
    Column("event_id", "integer", "Id in the session's event log (its order)", "", _EVENT_ID),
    Column("time", "datetime", "When the event was stored on the laptop (UTC)", "", _REQUIRED),
    Column("kind", "string", "What happened (the event's kind in the log)", "", _REQUIRED),
    Column("group_id", "string", "Group identifier within the session (empty for the whole session)"),
    Column("seat_id", "string", "Seat code (anonymous; never a name; empty when no seat is concerned)"),
    Column("detail", "string", "A short description (block, round, value, who entered it)"),
)

FIELD_DAY_TABLES: dict[str, tuple[Column, ...]] = {"surveys": SURVEYS, "timeline": TIMELINE}

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

# Rows that identify one another across tables (Table Schema primaryKey / foreignKeys).
_ROUND_KEY = ["session_id", "group_id", "block", "round", "practice"]
# Practice rounds are numbered like the paid game's first block, so ``practice`` is part of the keys.
PRIMARY_KEYS = {
    "decisions": ["session_id", "group_id", "seat_id", "block", "round", "practice"],
    "rounds": _ROUND_KEY,
    "seats": ["session_id", "group_id", "seat_id"],
    "surveys": ["session_id", "event_id"],
    "timeline": ["session_id", "event_id"],
}
FOREIGN_KEYS = {
    "decisions": [
        {"fields": _ROUND_KEY, "reference": {"resource": "rounds", "fields": _ROUND_KEY}},
        {"fields": ["session_id", "group_id", "seat_id"],
         "reference": {"resource": "seats", "fields": ["session_id", "group_id", "seat_id"]}},
    ],
    "rounds": [],
    "seats": [],
    "surveys": [
        {"fields": ["session_id", "group_id", "seat_id"],
         "reference": {"resource": "seats", "fields": ["session_id", "group_id", "seat_id"]}},
    ],
    "timeline": [],
}
# How booleans are written in the CSV files (0/1 read as numbers by R, Stata and spreadsheets).
TRUE_VALUES, FALSE_VALUES = ["1"], ["0"]
BOOLEAN_LABELS = {0: "no", 1: "yes"}
