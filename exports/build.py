"""Assemble the contract tables from a sequence of round outcomes."""

from __future__ import annotations

from collections.abc import Callable, Iterable

from ebbtide.game_logic.rounds import RoundOutcome
from ebbtide.game_logic.study import Study

from .tables import decision_rows, round_row, seat_rows


def tables_from_outcomes(
    study: Study,
    session_id: str,
    outcomes: Iterable[RoundOutcome],
    sources: Callable[[RoundOutcome], Iterable[str]],
    groups: int | None = None,
) -> dict[str, list[dict]]:
    """decisions, rounds and seats rows; ``sources(outcome)`` names each seat's channel."""
    decisions: list[dict] = []
    rounds: list[dict] = []
    for outcome in outcomes:
        decisions.extend(decision_rows(study, session_id, outcome, sources(outcome)))
        rounds.append(round_row(study, session_id, outcome))
    return {
        "decisions": decisions,
        "rounds": rounds,
        "seats": seat_rows(study, session_id, decisions, groups),
    }
