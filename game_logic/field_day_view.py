"""What a phone may see of the field day: one validated model, built in one function.

``field_day_screen`` is the field day's part of the information gate: the seat's stage
and only the words, pictures and sounds of that stage, in the seat's language. Right
answers of comprehension questions, other seats' answers, the risk task's draw before
the choice and anything about people never enter it. Cash on the end screen comes from
``field_day.seat_money`` (``money.earnings``), the same lines as the payment sheet.
"""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict

from .field_day import seat_money, text_sha256
from .field_day_spec import Media
from .money import money_text


class _Screen(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class ConsentScreen(_Screen):
    text: str
    text_sha256: str
    language: str


class InstructionScreen(_Screen):
    step: int  # 0-based
    steps: int
    text: str
    picture: str | None
    sound: str | None
    led: bool  # the facilitator moves the group's phones together


class QuestionScreen(_Screen):
    id: str
    number: int
    count: int
    text: str
    choices: list[str]
    picture: str | None
    sound: str | None
    wrong_tries: int
    feedback: str | None  # after a wrong answer, before the next try


class SurveyScreen(_Screen):
    questionnaire: str
    item: str
    kind: str
    number: int
    count: int
    text: str
    choices: list[str]
    min: int | None
    max: int | None
    max_length: int
    picture: str | None
    sound: str | None


class RiskScreen(_Screen):
    text: str
    gambles: list[tuple[int, int]]
    paid: bool
    picture: str | None
    sound: str | None


class PayLine(_Screen):
    kind: str  # game | risk | declined
    amount: str


class EndScreen(_Screen):
    lines: list[PayLine]
    total: str
    currency: str
    risk_gamble: int | None
    risk_outcome: str | None  # low | high, only after the seat chose
    risk_points: str | None


class FieldDayScreen(_Screen):
    stage: str
    practice: bool
    consent: ConsentScreen | None = None
    instruction: InstructionScreen | None = None
    question: QuestionScreen | None = None
    survey: SurveyScreen | None = None
    risk: RiskScreen | None = None
    end: EndScreen | None = None


def _in(texts: dict[str, str], language: str, fallback: str) -> str:
    return texts.get(language) or texts[fallback]


def _sound(media: Media, language: str) -> str | None:
    return (media.sound or {}).get(language)


def end_screen(state, g: int, seat: int) -> EndScreen:
    study = state.study
    day = state.day.seats[(g, seat)]
    money = seat_money(study, state.groups[g].units[seat], day)
    lines = []
    if money.game.cash:
        lines.append(PayLine(kind="game", amount=money_text(money.game.cash)))
    if money.risk_cash:
        lines.append(PayLine(kind="risk", amount=money_text(money.risk_cash)))
    if money.declined_cash:
        lines.append(PayLine(kind="declined", amount=money_text(money.declined_cash)))
    return EndScreen(
        lines=lines, total=money_text(money.total), currency=study.payment.currency,
        risk_gamble=day.risk[0] if day.risk else None, risk_outcome=day.risk[1] if day.risk else None,
        risk_points=str(money.risk_points) if day.risk else None,
    )


def field_day_screen(state, g: int, seat: int, language: str) -> FieldDayScreen:
    """The field-day part of seat ``seat`` of group ``g``'s snapshot, in ``language``."""
    study = state.study
    fallback = study.session.language
    day = state.day.seats[(g, seat)]
    stage = state.seat_stage(g, seat)
    practice = state.groups[g].practice is not None
    # Every screen named, null when not shown: the phone's payload keeps only keys that were set.
    parts: dict = dict.fromkeys(("consent", "instruction", "question", "survey", "risk", "end"))
    if stage in ("consent", "replace"):
        text = _in(study.consent.text, language, fallback)
        shown = language if language in study.consent.text else fallback
        parts["consent"] = ConsentScreen(text=text, text_sha256=text_sha256(text), language=shown)
    if stage in ("declined", "replace", "end"):
        parts["end"] = end_screen(state, g, seat)
    if stage == "instructions":
        step = study.instructions[day.step]
        parts["instruction"] = InstructionScreen(
            step=day.step, steps=len(study.instructions), text=_in(step.text, language, fallback),
            picture=step.picture, sound=_sound(step, language), led=g in state.day.led_step,
        )
    if stage == "comprehension":
        wanted = state.day.open_question(day)
        number, question = next((i, q) for i, q in enumerate(study.comprehension) if q.id == wanted)
        tries = day.attempts.get(wanted, [])
        parts["question"] = QuestionScreen(
            id=wanted, number=number + 1, count=len(study.comprehension),
            text=_in(question.text, language, fallback),
            choices=[_in(c, language, fallback) for c in question.choices],
            picture=question.picture, sound=_sound(question, language), wrong_tries=len(tries),
            feedback=_in(question.feedback, language, fallback) if tries else None,
        )
    if stage in ("survey_before", "survey_after"):
        when = stage.removeprefix("survey_")
        questionnaire_id, item_id = state.day.next_item(g, seat, when)
        items = [(q.id, i) for q in study.questionnaires if q.when == when for i in q.items]
        number = next(n for n, (q, i) in enumerate(items) if (q, i.id) == (questionnaire_id, item_id))
        item = items[number][1]
        parts["survey"] = SurveyScreen(
            questionnaire=questionnaire_id, item=item_id, kind=item.kind, number=number + 1,
            count=len(items), text=_in(item.text, language, fallback),
            choices=[_in(c, language, fallback) for c in item.choices], min=item.min, max=item.max,
            max_length=item.max_length, picture=item.picture, sound=_sound(item, language),
        )
    if stage == "risk":
        task = study.risk_task
        parts["risk"] = RiskScreen(
            text=_in(task.text, language, fallback), gambles=[tuple(g_) for g_ in task.gambles],
            paid=task.paid, picture=task.picture, sound=_sound(task, language),
        )
    return FieldDayScreen(stage=stage, practice=practice, **parts)
