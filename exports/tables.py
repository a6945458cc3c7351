"""Turn round outcomes into rows of the contract tables."""

from __future__ import annotations

import math
from collections.abc import Iterable

from ebbtide.game_logic.money import earnings
from ebbtide.game_logic.resource import below_threshold
from ebbtide.game_logic.rounds import RoundOutcome
from ebbtide.game_logic.session_fold import CLOSED
from ebbtide.game_logic.study import Study


def group_code(group: int) -> str:
    """Printable id of group ``group`` (0-based): G01, G02, ..."""
    return f"G{group + 1:02d}"


def seat_code(group: int, seat: int) -> str:
    """Printable id of a seat (both 0-based): G01-1, G01-2, ..."""
    return f"{group_code(group)}-{seat + 1}"


# What a decision row holds where the pilot knows no time, phone or practice.
NO_TIMING = {"stored_at": "", "seconds_from_open": "", "language": "", "pictures": "", "practice": False}


def decision_rows(
    study: Study, session_id: str, outcome: RoundOutcome, sources: Iterable[str]
) -> list[dict]:
    """One row per seat for a resolved round; ``sources`` gives each seat's entry channel.

    An absent seat (source ``absent``) has empty harvests and points: it did not play.
    """
    treatment = study.blocks[outcome.block].treatment_for(outcome.group)
    rows = [
        {
            "session_id": session_id,
            "group_id": group_code(outcome.group),
            "seat_id": seat_code(outcome.group, seat),
            "block": outcome.block + 1,
            "treatment": treatment,
            "round": outcome.round,
            "stock_before": outcome.stock_before,
            # A closed round's missing seat asked nothing: empty, not a typed 0.
            "harvest_asked": "" if source == CLOSED else asked,
            "harvest_taken": taken,
            "points": earnings(taken, study.payment).points,
            "source": source,
            **NO_TIMING,
        }
        for seat, (asked, taken, source) in enumerate(
            zip(outcome.asked, outcome.taken, sources, strict=True)
        )
    ]
    for row in rows:
        if row["source"] == "absent":
            row.update(harvest_asked="", harvest_taken="", points="")
    return rows


def round_row(study: Study, session_id: str, outcome: RoundOutcome) -> dict:
    """The group-round row of a resolved round (hidden threshold included: analysts see all)."""
    block = study.blocks[outcome.block]
    return {
        "session_id": session_id,
        "group_id": group_code(outcome.group),
        "block": outcome.block + 1,
        "treatment": block.treatment_for(outcome.group),
        "round": outcome.round,
        "stock_before": outcome.stock_before,
        "total_taken": outcome.total_taken,
        "remaining": outcome.remaining,
        "stock_after": outcome.stock_after,
        "regime_after": str(outcome.regime_after),
        "threshold": "" if outcome.threshold is None else outcome.threshold,
        "crossed": outcome.crossed,
        "regime_before": str(outcome.regime_before),
        "recovered": outcome.recovered,
        "regrowth": outcome.regrowth,
        "block_name": block.name,
        "talk": block.talk,
        "show_others": block.show_others,
        "end_reason": outcome.end_reason or "",
        "below_threshold": bool(below_threshold(
            outcome.remaining, math.nan if outcome.threshold is None else outcome.threshold)),
        "practice": False,
    }


def seat_rows(
    study: Study, session_id: str, decisions: list[dict], groups: int | None = None
) -> list[dict]:
    """Totals and cash per seat from the units taken in the decision rows (every seat
    listed, even idle ones); points and cash are ``earnings`` of the seat's whole units.

    ``groups`` defaults to the study's group count; the pilot plays more.
    """
    count = study.groups.count if groups is None else groups
    units = {(g, s): 0 for g in range(count) for s in range(study.seats)}
    by_code = {seat_code(g, s): (g, s) for g, s in units}
    for row in decisions:
        if row["practice"] or row["source"] == "absent":
            continue  # practice pays nothing; an absent seat took nothing
        units[by_code[row["seat_id"]]] += row["harvest_taken"]
    return seat_rows_from_units(study, session_id, units)


def seat_rows_from_units(study: Study, session_id: str, units: dict[tuple[int, int], int]) -> list[dict]:
    """Seat rows from whole units taken per (group, seat), both 0-based, in the mapping's order."""
    rows = []
    for (g, s), taken in units.items():
        paid = earnings(taken, study.payment)
        rows.append({
            "session_id": session_id,
            "group_id": group_code(g),
            "seat_id": seat_code(g, s),
            "points_total": paid.points,
            "payment": paid.cash,
            "currency": study.payment.currency,
            "consent": "", "risk_gamble": "", "risk_outcome": "", "risk_points": 0, "risk_payment": 0,
            "declined_payment": 0, "total_payment": paid.cash,
        })
    return rows
