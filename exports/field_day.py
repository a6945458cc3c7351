"""The field day in the export: decision timing, practice rows, each seat's cash lines,
``surveys.csv`` (every answer in long form) and ``timeline.csv`` (what happened when).

Facts come from the replayed ``SessionState``; times come from the stored events (the
core has no clock), joined by event id. Nothing that could name a person is written:
seat codes only, never a device id, a seat secret, the console PIN or a roster.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any

from ebbtide.game_logic.field_day import practice_study, seat_money
from ebbtide.game_logic.rounds import RoundOutcome
from ebbtide.game_logic.session_fold import DecisionTiming, SessionState
from ebbtide.game_logic.study import Study

from .tables import decision_rows, group_code, round_row, seat_code, seat_rows


def parse_time(stamp: str) -> datetime:
    return datetime.fromisoformat(stamp)


def _timing_rows(rows: list[dict], timing: DecisionTiming, times: dict[int, str], practice: bool) -> None:
    opened = times.get(timing.opened_event)
    for row, event, language, pictures in zip(
        rows, timing.decision_events, timing.languages, timing.pictures, strict=True
    ):
        row["practice"] = practice
        if event is None or event not in times:
            continue
        row["stored_at"] = times[event]
        if opened is not None:
            seconds = (parse_time(times[event]) - parse_time(opened)).total_seconds()
            row["seconds_from_open"] = round(seconds, 3)
        row["language"] = language
        row["pictures"] = "" if pictures is None else pictures


def live_tables(state: SessionState, session_id: str, times: dict[int, str], events: list[Any]) -> dict:
    """Every table of a live session: the contract tables plus surveys and timeline."""
    study = state.study
    decisions: list[dict] = []
    rounds: list[dict] = []
    for progress in state.groups:
        pairs: list[tuple[RoundOutcome, tuple[str, ...], DecisionTiming, bool]] = [
            *zip(progress.practice_outcomes, progress.practice_sources, progress.practice_timings,
                 [True] * len(progress.practice_outcomes), strict=True),
            *zip(progress.outcomes, progress.sources, progress.timings,
                 [False] * len(progress.outcomes), strict=True),
        ]
        for outcome, sources, timing, practice in pairs:
            rows = decision_rows(study, session_id, outcome, sources)
            _timing_rows(rows, timing, times, practice)
            decisions.extend(rows)
            # Practice rounds are rows of rounds.csv too (practice = 1, their own stock), so that
            # every decision row has its round; the analysis leaves them out.
            rows_study = practice_study(study) if practice else study
            rounds.append({**round_row(rows_study, session_id, outcome), "practice": practice})
    seats = seat_rows(study, session_id, decisions)
    for row in seats:
        g, s = _seat_of(row["seat_id"])
        day = state.day.seats[(g, s)]
        money = seat_money(study, state.groups[g].units[s], day)
        row.update(
            points_total=money.game.points, payment=money.game.cash, consent=day.consent,
            risk_gamble=day.risk[0] if day.risk else "", risk_outcome=day.risk[1] if day.risk else "",
            risk_points=money.risk_points, risk_payment=money.risk_cash,
            declined_payment=money.declined_cash, total_payment=money.total,
        )
    return {
        "decisions": decisions, "rounds": rounds, "seats": seats,
        "surveys": survey_rows(state, session_id, times),
        "timeline": timeline_rows(session_id, events),
    }



def _seat_of(code: str) -> tuple[int, int]:
    group, seat = code.removeprefix("G").split("-")
    return int(group) - 1, int(seat) - 1


def survey_rows(state: SessionState, session_id: str, times: dict[int, str]) -> list[dict]:
    """Consent, comprehension attempts, questionnaire answers and the risk choice, in log order."""
    rows = []
    blank = {"attempt": "", "correct": "", "language": "", "text_sha256": "", "outcome": ""}
    for (g, s), day in state.day.seats.items():
        where = {"session_id": session_id, "group_id": group_code(g), "seat_id": seat_code(g, s)}
        for c in day.consents:
            rows.append({**where, **blank, "questionnaire": "consent", "item": "consent",
                         "answer": "agree" if c["agree"] else "decline", "event_id": c["event"],
                         "language": c["language"], "text_sha256": c["text_sha256"]})
        for question, tries in day.attempts.items():
            for attempt, (choice, right, event) in enumerate(tries, start=1):
                rows.append({**where, **blank, "questionnaire": "comprehension", "item": question,
                             "answer": str(choice), "event_id": event, "attempt": attempt, "correct": right})
        for (questionnaire, item), (answer, event) in day.answers.items():
            rows.append({**where, **blank, "questionnaire": questionnaire, "item": item,
                         "answer": answer, "event_id": event})
        if day.risk is not None:
            gamble, outcome, event = day.risk
            rows.append({**where, **blank, "questionnaire": "risk_task", "item": "gamble",
                         "answer": str(gamble), "event_id": event, "outcome": outcome})
    for row in rows:
        row["time"] = times.get(row["event_id"], "")
    rows.sort(key=lambda r: r["event_id"])
    return rows


def _detail(kind: str, body: dict[str, Any]) -> str:
    """A few words per event; never a device id, secret, PIN hash or the study text."""
    where = f"block {body['block']} round {body['round']}" if "round" in body and "block" in body else ""
    if kind in ("harvest_submitted", "harvest_corrected"):
        practice = " (practice)" if body.get("practice") else ""
        return f"{where}{practice}: {body['harvest']} by {body.get('source', 'console')}"
    if kind == "round_closed":
        return f"{where} closed by the facilitator"
    if kind == "round_resolved":
        return f"{where}: stock {body.get('stock_before')} -> {body.get('stock_after')}"
    if kind == "consent_answered":
        return f"{'agreed' if body['agree'] else 'did not agree'} ({body['language']})"
    if kind in ("instruction_step", "instructions_led"):
        return f"instruction step {body['step'] + 1}"
    if kind == "comprehension_answered":
        return f"question {body['question']}: choice {body['choice']}"
    if kind == "survey_answered":
        return f"{body['questionnaire']}/{body['item']}"
    if kind == "risk_chosen":
        return f"gamble {body['gamble']}"
    if kind == "seat_claimed":
        return "seat card scanned" if body.get("via") == "card" else "phone reconnected"
    return ""


def timeline_rows(session_id: str, events: list[Any]) -> list[dict]:
    """One row per stored event, in log order."""
    rows = []
    for event in events:
        body = event.body if isinstance(event.body, dict) else {}
        group = body.get("group")
        seat = body.get("seat")
        rows.append({
            "session_id": session_id, "event_id": event.id, "time": event.created_at, "kind": event.kind,
            "group_id": group_code(group) if isinstance(group, int) else "",
            "seat_id": seat_code(group, seat) if isinstance(group, int) and isinstance(seat, int) else "",
            "detail": _detail(event.kind, body),
        })
    return rows


def survey_codebook(study: Study) -> list[dict]:
    """Every item's wording per language and its allowed answers, for ``datapackage.json``."""
    items = []
    for question in study.comprehension:
        items.append({
            "questionnaire": "comprehension", "item": question.id, "kind": "single", "text": question.text,
            "choices": list(question.choices), "right_answer": question.answer,
            "allowed": f"one choice number, 1..{len(question.choices)}",
        })
    for questionnaire in study.questionnaires:
        for item in questionnaire.items:
            items.append({
                "questionnaire": questionnaire.id, "when": questionnaire.when, "item": item.id,
                "kind": item.kind, "text": item.text, "choices": list(item.choices),
                "allowed": item.allowed(),
            })
    if study.risk_task is not None:
        items.append({
            "questionnaire": "risk_task", "item": "gamble", "kind": "single", "text": study.risk_task.text,
            "gambles": [list(g) for g in study.risk_task.gambles], "paid": study.risk_task.paid,
            "allowed": f"one gamble number, 1..{len(study.risk_task.gambles)}; each pays low or high "
                       "with chance 1/2 (Eckel and Grossman 2002)",
        })
    if study.consent is not None:
        items.append({"questionnaire": "consent", "item": "consent", "kind": "consent",
                      "text": study.consent.text, "on_decline": study.consent.on_decline,
                      "allowed": "agree or decline"})
    return items
