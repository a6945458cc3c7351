"""The field day at the edge: phones answer consent, step through instructions, answer
questions, questionnaires and the risk task; the console leads a group's instructions;
pictures and sounds are served from the study folder on the laptop.

Every rule lives in ``game_logic.field_day``; here a message becomes an event body.
"""

from __future__ import annotations

from pathlib import Path

from flask import abort, current_app, send_from_directory

from ebbtide.game_logic.field_day_spec import media_files

from ..messages import (
    ComprehensionAnswer,
    ConsentAnswer,
    GroupStep,
    InstructionStepRequest,
    RiskChoice,
    SurveyAnswer,
)
from ..registry import LiveSession
from ..sockets import Connection, edge, send_console, send_group, send_seat
from .routes import bp


def _seat_event(live: LiveSession, conn: Connection, kind: str, body: dict) -> dict:
    change = live.submit(kind, {"group": conn.group, "seat": conn.seat, **body})
    send_seat(live, conn.group, conn.seat)
    send_console(live)
    return {"ok": True, "seq": change.seq}


@edge("consent", ConsentAnswer, role="phone")
def on_consent(conn: Connection, live: LiveSession, msg: ConsentAnswer):
    """A person agrees or does not: stored with the language and hash of the text shown."""
    answer = _seat_event(live, conn, "consent_answered",
                         {"agree": msg.agree, "language": msg.language, "text_sha256": msg.text_sha256})
    if not msg.agree:
        send_group(live, conn.group)  # an absent seat may let the group's open round resolve
    return answer


@edge("instruction_step", InstructionStepRequest, role="phone")
def on_instruction_step(conn: Connection, live: LiveSession, msg: InstructionStepRequest):
    return _seat_event(live, conn, "instruction_step", {"step": msg.step})


@edge("comprehension_answer", ComprehensionAnswer, role="phone")
def on_comprehension(conn: Connection, live: LiveSession, msg: ComprehensionAnswer):
    answer = _seat_event(live, conn, "comprehension_answered",
                         {"question": msg.question, "choice": msg.choice})
    tries = live.state.day.seats[(conn.group, conn.seat)].attempts[msg.question]
    answer["right"] = tries[-1][1]
    return answer


@edge("survey_answer", SurveyAnswer, role="phone")
def on_survey(conn: Connection, live: LiveSession, msg: SurveyAnswer):
    return _seat_event(live, conn, "survey_answered",
                       {"questionnaire": msg.questionnaire, "item": msg.item, "answer": msg.answer})


@edge("risk_choice", RiskChoice, role="phone")
def on_risk(conn: Connection, live: LiveSession, msg: RiskChoice):
    return _seat_event(live, conn, "risk_chosen", {"gamble": msg.gamble})


@edge("console_lead_instructions", GroupStep, role="console")
def on_lead(conn: Connection, live: LiveSession, msg: GroupStep):
    """Facilitator: every consenting phone of a group shows the same instruction step."""
    change = live.submit("instructions_led", {"group": msg.group - 1, "step": msg.step - 1})
    send_group(live, msg.group - 1)
    send_console(live)
    return {"ok": True, "seq": change.seq}


@bp.get("/media/<path:name>")
def media(name: str):
    """A picture or sound the study names, from the study folder (nothing else is served)."""
    study = current_app.config.get("EBBTIDE_STUDY")
    if study is None or not study.folder or name not in media_files(study):
        abort(404)
    return send_from_directory(Path(study.folder), name, max_age=3600)
