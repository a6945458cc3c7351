"""The field day on the console: each seat's stage and consent, who is stuck on which
question, the group's led instruction step, the day's stages with elapsed time against
the plan ``ebbtide check`` prints, and the latest events of the timeline."""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from ebbtide.exports.field_day import timeline_rows
from ebbtide.game_logic.field_day_spec import day_plan

TIMELINE_LINES = 12

# The event kinds whose first time marks when a stage of the day began.
_STAGE_STARTS = {
    "setup": ("session_created",),
    "consent": ("consent_answered",),
    "instructions": ("instruction_step", "instructions_led", "comprehension_answered"),
    "questionnaire": ("risk_chosen",),
}


def _current_stage(state) -> str:
    study = state.study
    if state.status == "setup":
        stages = {state.seat_stage(g, s) for g in range(study.groups.count) for s in range(study.seats)}
        if stages & {"consent", "replace"} and study.consent is not None:
            return "consent"
        return "instructions" if stages & {"instructions", "comprehension", "survey_before"} else "setup"
    if state.status != "ended" and any(p.practice is not None for p in state.groups):
        return "practice"
    if state.status != "ended":
        return "blocks"
    stages = {state.seat_stage(g, s) for g in range(study.groups.count) for s in range(study.seats)}
    return "questionnaire" if stages & {"risk", "survey_after"} else "payment"


def _minutes(since: str | None, until: datetime) -> float | None:
    return None if since is None else round((until - datetime.fromisoformat(since)).total_seconds() / 60, 1)


def day_panel(live, now: datetime | None = None) -> dict[str, Any]:
    """What the console's panel of the day shows (the facilitator sees everything)."""
    now = now or datetime.now(UTC)
    state = live.state
    first = live.store.first_times(live.session_id)
    starts = {stage: min((first[k] for k in kinds if k in first), default=None)
              for stage, kinds in _STAGE_STARTS.items()}
    practice = state.study.practice.rounds > 0
    starts["practice" if practice else "blocks"] = first.get("session_started")
    if practice:
        starts["blocks"] = first.get("block_opened")
    current = _current_stage(state)
    stages, planned_from = [], 0.0
    for stage, minutes in day_plan(state.study):
        stages.append({
            "stage": stage, "planned_from": planned_from, "planned_to": planned_from + minutes,
            "started_after": _minutes(first.get("session_created"), datetime.fromisoformat(starts[stage]))
            if starts.get(stage) and first.get("session_created") else None,
            "current": stage == current,
        })
        planned_from += minutes
    elapsed = _minutes(first.get("session_created"), now)
    here = next(s for s in stages if s["current"])
    return {
        "current": current,
        "elapsed_minutes": elapsed,
        # Positive: behind the plan (the current stage should have ended by now).
        "behind_minutes": None if elapsed is None else round(max(0.0, elapsed - here["planned_to"]), 1),
        "stages": stages,
        "timeline": timeline_rows(live.session_id, live.store.last_events(live.session_id, TIMELINE_LINES)),
    }


def add_day_to_console_snapshot(live, snapshot: dict[str, Any]) -> dict[str, Any]:
    """Per seat its stage, consent and open question (with wrong tries); per group its led step."""
    state = live.state
    study = state.study
    for g, group in enumerate(snapshot["groups"]):
        practice = state.groups[g].practice
        group["practice"] = practice is not None
        if practice is not None:  # the practice stock is the one being played
            group["round"] = practice.round + (0 if practice.block_over else 1)
            group["stock"] = practice.stock
        group["led_step"] = state.day.led_step.get(g)
        group["steps"] = len(study.instructions)
        for s, seat in enumerate(group["seats"]):
            day = state.day.seats[(g, s)]
            question = state.day.open_question(day) if study.comprehension else None
            wrong = len(day.attempts.get(question, ())) if question else 0
            seat["stage"] = state.seat_stage(g, s)
            seat["consent"] = day.consent if study.consent is not None else "not_asked"
            seat["stuck_on"] = question if wrong else None
            seat["wrong_tries"] = wrong
    snapshot["day"] = day_panel(live)
    return snapshot
