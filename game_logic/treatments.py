"""What a treatment lets a participant see: the core of the one information gate.

``participant_view`` is the treatment's part of what a phone is sent; the whole
snapshot (this view, a revealed debrief, neutral UI state) is built and validated in
``phone_snapshot.py``. Hidden values (the threshold under ``none``/``vague``/``range``/
``signal``, the seed, the round's random draws, other seats' harvests when
``show_others`` is off, the regime label) and the researcher's own words (block names,
treatment keys) are never put into its result, so they cannot leak by accident; the
danger's ``kind`` is what the screen draws.
"""

from __future__ import annotations

from decimal import Decimal
from typing import Any

from .early_warning import health_reading
from .money import decimal_text, earnings
from .rounds import GroupState, RoundOutcome
from .study import Study

# Treatments whose ``danger_info`` is the same for every group of a block (no threshold, no path).
GROUP_INDEPENDENT = frozenset({"none", "vague", "range"})


def danger_info(study: Study, state: GroupState) -> dict[str, Any]:
    """What the block's treatment says about the danger level."""
    treatment = study.blocks[state.block].treatment_for(state.group)
    if treatment == "none":
        return {"kind": "none"}
    if treatment == "vague":
        return {"kind": "vague"}
    if treatment == "range":
        low, high = study.threshold.range_shown
        return {"kind": "range", "low": low, "high": high}
    if treatment == "exact":
        return {"kind": "exact", "level": round(state.threshold, 1)}
    if treatment == "risk":
        return {
            "kind": "risk",
            "level": round(state.threshold, 1),
            "flip_probability": study.threshold.flip_probability,
        }
    # Words only: the reading's score and parts stay on the server (console, analysis).
    reading = health_reading(state.stock_path, study.resource.capacity)
    return {"kind": "signal", "band": reading.band, "trend": reading.trend,
            "reasons": list(reading.reasons)}


def last_round_info(study: Study, outcome: RoundOutcome, seat: int) -> dict[str, Any]:
    """One seat's view of the round just resolved."""
    info: dict[str, Any] = {
        "round": outcome.round,
        "asked": outcome.asked[seat],
        "taken": outcome.taken[seat],
        # Exact decimal text ("0.3"): a JSON float would invite float sums on the phone.
        "points": decimal_text(earnings(outcome.taken[seat], study.payment).points),
        "group_total": outcome.total_taken,
        "remaining": outcome.remaining,
        "regrowth": outcome.regrowth,
        "stock_after": outcome.stock_after,
        "rationed": outcome.asked != outcome.taken,
    }
    if study.blocks[outcome.block].show_others:
        info["others"] = [t for i, t in enumerate(outcome.taken) if i != seat]
    return info


def participant_view(
    study: Study,
    state: GroupState,
    seat: int,
    last_outcome: RoundOutcome | None,
    points_total: Decimal,
) -> dict[str, Any]:
    """Everything seat ``seat`` (0-based) of the group may see right now.

    ``last_outcome`` is the group's latest resolved round in the current block,
    or None before the first. The result is JSON-ready.
    """
    block = study.blocks[state.block]
    view: dict[str, Any] = {
        "seat": seat + 1,
        "seats": study.seats,
        "block": state.block + 1,
        "blocks": len(study.blocks),
        "talk": block.talk,
        "talk_seconds": block.talk_seconds if block.talk else 0,
        "show_others": block.show_others,
        "round": state.round + (0 if state.block_over else 1),
        "stock": state.stock,
        "capacity": study.resource.capacity,
        "max_harvest": study.resource.max_harvest,
        "unit": study.resource.unit,
        "points_total": decimal_text(points_total),
        "block_over": state.block_over,
        "session_over": state.session_over,
        "danger": danger_info(study, state),
    }
    if study.end.rule == "fixed":
        view["rounds_in_block"] = block.rounds
    else:
        view["continuation_probability"] = study.end.continuation_probability
    if last_outcome is not None and last_outcome.block == state.block:
        view["last_round"] = last_round_info(study, last_outcome, seat)
    return view
