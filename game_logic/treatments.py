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

import numpy as np
from numpy.typing import NDArray

from .early_warning import BANDS, health_reading
from .money import decimal_text, earnings
from .rounds import GroupState, RoundOutcome
from .study import Study

# Wide enough for every band name: numpy would cut a longer one short without a word.
BAND_DTYPE = f"<U{max(len(b) for b in BANDS)}"


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
        return {"kind": "exact", "level": told_level(state.threshold)}
    if treatment == "risk":
        return {
            "kind": "risk",
            "level": told_level(state.threshold),
            "flip_probability": study.threshold.flip_probability,
        }
    # Words only: the reading's score and parts stay on the server (console, analysis).
    reading = health_reading(state.stock_path, study.resource.capacity)
    return {"kind": "signal", "band": reading.band, "trend": reading.trend,
            "reasons": list(reading.reasons)}


def told_level(threshold: float) -> float:
    """The danger level the exact and risk treatments tell: the threshold to one decimal."""
    return round(threshold, 1)


def treatments_of(study: Study, block: int, groups: NDArray[np.int64]) -> NDArray[np.str_]:
    """``treatment_for`` of many groups in ``block``: the rotation has period len(all_treatments)."""
    spec = study.blocks[block]
    period = len(spec.all_treatments)
    return np.array([spec.treatment_for(r) for r in range(period)])[np.asarray(groups) % period]


def danger_columns(study: Study, block: int, groups: NDArray[np.int64], thresholds: NDArray[np.float64],
                   stocks: NDArray[np.int64]) -> dict[str, NDArray]:
    """What ``danger_info`` says to many groups at the start of ``block``, as columns over the groups.

    ``kind``, ``level``, ``low``, ``high``, ``flip_probability`` and ``band``: a number the
    treatment does not give is NaN, a band outside ``signal`` is "". A signal's band is read
    from the block's one-stock path (``stocks``, the stock each group starts the block with);
    the trend and reasons are left out. The offline pilot's fast path; ``danger_info`` is the rule.
    """
    kind = treatments_of(study, block, groups)
    level, low, high, flip = (np.full(kind.shape, np.nan) for _ in range(4))
    told = (kind == "exact") | (kind == "risk")
    if told.any():
        level[told] = [told_level(t) for t in np.asarray(thresholds, dtype=float)[told].tolist()]
    ranged = kind == "range"
    if ranged.any():
        low[ranged], high[ranged] = study.threshold.range_shown
    flip[kind == "risk"] = study.threshold.flip_probability
    band = np.full(kind.shape, "", dtype=BAND_DTYPE)
    signal = np.flatnonzero(kind == "signal")
    if signal.size:
        starts = np.asarray(stocks)[signal]
        bands = {s: health_reading((s,), study.resource.capacity).band for s in set(starts.tolist())}
        band[signal] = [bands[s] for s in starts.tolist()]
    return {"kind": kind, "level": level, "low": low, "high": high, "flip_probability": flip, "band": band}


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
