"""The field day's stages as events: consent, instructions, comprehension, questionnaires
and the risk-attitude task, folded seat by seat; practice rounds and the payment lines.

``SessionState`` (``session_fold.py``) hands every event of ``FIELD_DAY_KINDS`` to
``FieldDay.check`` and ``FieldDay.apply``, so the live server, crash recovery and the
export read the same facts. Times are not here (the core has no clock): every fact keeps
the id of the event that recorded it, and the shell joins that id with the stored time.

Stages of a seat, in order (``seat_stage``):
consent -> instructions -> comprehension -> questionnaires "before" -> the game
(practice rounds first, if any) -> risk task -> questionnaires "after" -> end.
A person who does not agree is paid the show-up fee and plays no round: under
``on_decline = "absent"`` the seat stays empty and its harvests are recorded as absent;
under ``"replacement"`` another person may take the seat card and consents afresh.
"""

from __future__ import annotations

import copy
import hashlib
from dataclasses import dataclass, field
from decimal import Decimal
from typing import Any

from .errors import Refused, UnknownSeat
from .money import Earnings, earnings
from .resource import draw_threshold
from .rounds import GroupState, Regime
from .seeding import practice_threshold_rng, risk_task_rng
from .study import BlockSpec, EndSpec, Study

FIELD_DAY_KINDS = frozenset({
    "consent_answered", "instruction_step", "instructions_led",
    "comprehension_answered", "survey_answered", "risk_chosen",
})
STAGES = ("consent", "replace", "declined", "instructions", "comprehension", "survey_before",
          "game", "risk", "survey_after", "end")
PRACTICE_BLOCK_NAME = "practice"


def text_sha256(text: str) -> str:
    """SHA-256 (hex) of a text as shown, UTF-8: what the consent record keeps, never a name."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


@dataclass
class SeatDay:
    """One seat's field day so far (each fact with the id of its event)."""

    consent: str = ""  # "" | given | declined (the latest person's answer)
    consents: list[dict[str, Any]] = field(default_factory=list)  # every answer, in order
    step: int = 0  # instruction step the seat shows (0-based); len(steps) = done
    # question -> every (choice, right, event), in order
    attempts: dict[str, list[tuple[int, bool, int]]] = field(default_factory=dict)
    # (questionnaire, item) -> (answer, event)
    answers: dict[tuple[str, str], tuple[str, int]] = field(default_factory=dict)
    risk: tuple[int, str, int] | None = None  # (gamble 1-based, "low" | "high", event)

    @property
    def declined_count(self) -> int:
        return sum(1 for c in self.consents if not c["agree"])


@dataclass
class FieldDay:
    """Every seat's field day, keyed (group, seat), both 0-based."""

    study: Study
    seed: int
    seats: dict[tuple[int, int], SeatDay] = field(default_factory=dict)
    led_step: dict[int, int] = field(default_factory=dict)  # group -> step the facilitator shows

    @classmethod
    def new(cls, study: Study, seed: int) -> FieldDay:
        seats = {(g, s): SeatDay() for g in range(study.groups.count) for s in range(study.seats)}
        return cls(study, seed, seats)

    def fork(self) -> FieldDay:
        """A copy for the next version of the session (copy-on-write, as ``SessionState.fork``).

        The dicts stay shared until this version first changes one (most events of a
        session change no seat's day, and copying a thousand seats per event would make
        every decision cost more in a large session); a seat's day is copied before it changes.
        """
        forked = FieldDay(self.study, self.seed, self.seats, self.led_step)
        forked._shared = True
        return forked

    def _unshare(self) -> None:
        if getattr(self, "_shared", False):
            self.seats, self.led_step = dict(self.seats), dict(self.led_step)
            self._shared = False

    def _own(self, key: tuple[int, int]) -> SeatDay:
        # Earlier versions may still hold this SeatDay: change a copy, never the shared one.
        self._unshare()
        self.seats[key] = copy.deepcopy(self.seats[key])
        return self.seats[key]

    # -- who plays --------------------------------------------------------------

    def consented(self, g: int, s: int) -> bool:
        return self.study.consent is None or self.seats[(g, s)].consent == "given"

    def absent(self, g: int, s: int) -> bool:
        """A seat left empty after its person declined (``on_decline = "absent"``)."""
        consent = self.study.consent
        declined = self.seats[(g, s)].consent == "declined"
        return consent is not None and consent.on_decline == "absent" and declined

    # -- stages -------------------------------------------------------------------

    def _questionnaire_left(self, day: SeatDay, when: str) -> tuple[str, str] | None:
        for questionnaire in self.study.questionnaires:
            if questionnaire.when != when:
                continue
            for item in questionnaire.items:
                if (questionnaire.id, item.id) not in day.answers:
                    return questionnaire.id, item.id
        return None

    def open_question(self, day: SeatDay) -> str | None:
        """The first comprehension question not yet answered right."""
        for question in self.study.comprehension:
            if not any(right for _, right, _ in day.attempts.get(question.id, ())):
                return question.id
        return None

    def seat_stage(self, g: int, s: int, game_over: bool) -> str:
        day = self.seats[(g, s)]
        consent = self.study.consent
        if consent is not None and day.consent != "given":
            if day.consent == "declined":
                return "declined" if consent.on_decline == "absent" else "replace"
            return "consent"
        if day.step < len(self.study.instructions):
            return "instructions"
        if self.open_question(day) is not None:
            return "comprehension"
        if self._questionnaire_left(day, "before") is not None:
            return "survey_before"
        if not game_over:
            return "game"
        if self.study.risk_task is not None and day.risk is None:
            return "risk"
        if self._questionnaire_left(day, "after") is not None:
            return "survey_after"
        return "end"

    def next_item(self, g: int, s: int, when: str) -> tuple[str, str] | None:
        return self._questionnaire_left(self.seats[(g, s)], when)

    # -- checks (raise Refused, change nothing) ----------------------------------

    def check(self, kind: str, body: dict[str, Any], game_over: bool) -> None:
        if kind == "instructions_led":
            self._step_in_range(body["step"])
            return
        key = (body["group"], body["seat"])
        if key not in self.seats:
            raise UnknownSeat(f"group {key[0] + 1}, seat {key[1] + 1} does not exist")
        stage = self.seat_stage(*key, game_over)
        if kind == "consent_answered":
            self._check_consent(body, stage)
        elif kind == "instruction_step":
            if stage in ("consent", "replace", "declined"):
                raise Refused("no_consent", "consent comes first; the instructions follow it")
            self._step_in_range(body["step"])
        elif kind == "comprehension_answered":
            self._check_comprehension(key, body, stage)
        elif kind == "survey_answered":
            self._check_survey(key, body, stage)
        elif kind == "risk_chosen":
            task = self.study.risk_task
            if task is None:
                raise Refused("no_risk_task", "this study has no risk task")
            if stage != "risk":
                raise Refused("wrong_stage", f"the risk task is not open for this seat (it is at {stage})")
            count = len(task.gambles)
            if isinstance(body["gamble"], bool) or not isinstance(body["gamble"], int) \
                    or not 1 <= body["gamble"] <= count:
                raise Refused("invalid_choice", f"gamble {body['gamble']!r}; allowed: 1..{count}")

    def _step_in_range(self, step: Any) -> None:
        count = len(self.study.instructions)
        if isinstance(step, bool) or not isinstance(step, int) or not 0 <= step <= count:
            raise Refused("invalid_step", f"step {step!r}; allowed: 0..{count} ({count} = done)")

    def _check_consent(self, body: dict[str, Any], stage: str) -> None:
        consent = self.study.consent
        if consent is None:
            raise Refused("no_consent_text", "this study has no consent step")
        if stage not in ("consent", "replace"):
            raise Refused("already_answered", "this seat's consent is already recorded")
        language = body["language"]
        if language not in consent.text:
            raise Refused("bad_language", f"language {language!r}; allowed: {', '.join(consent.text)}")
        if body["text_sha256"] != text_sha256(consent.text[language]):
            raise Refused("stale_text", "the consent text shown is not the study's; reload the page")

    def _check_comprehension(self, key: tuple[int, int], body: dict[str, Any], stage: str) -> None:
        if stage != "comprehension":
            raise Refused("wrong_stage", f"no question is open for this seat (it is at {stage})")
        wanted = self.open_question(self.seats[key])
        if body["question"] != wanted:
            raise Refused("wrong_question",
                          f"question {body['question']!r} is not open; the open one is {wanted!r}")
        question = next(q for q in self.study.comprehension if q.id == wanted)
        choice, count = body["choice"], len(question.choices)
        if isinstance(choice, bool) or not isinstance(choice, int) or not 1 <= choice <= count:
            raise Refused("invalid_choice", f"choice {choice!r}; allowed: 1..{count}")

    def _check_survey(self, key: tuple[int, int], body: dict[str, Any], stage: str) -> None:
        if stage not in ("survey_before", "survey_after"):
            raise Refused("wrong_stage", f"no questionnaire is open for this seat (it is at {stage})")
        wanted = self._questionnaire_left(self.seats[key], stage.removeprefix("survey_"))
        if (body["questionnaire"], body["item"]) != wanted:
            raise Refused("wrong_item", f"item {body['questionnaire']}/{body['item']} is not open; "
                          f"the open one is {wanted[0]}/{wanted[1]}")
        normalise_answer(self.study, body["questionnaire"], body["item"], body["answer"])

    # -- applying -------------------------------------------------------------------

    def apply(self, kind: str, body: dict[str, Any], seq: int) -> None:
        if kind == "instructions_led":
            g = body["group"]
            self._unshare()
            self.led_step[g] = body["step"]
            for group, seat in list(self.seats):
                if group == g and self.consented(group, seat):
                    self._own((group, seat)).step = body["step"]
            return
        day = self._own((body["group"], body["seat"]))
        if kind == "consent_answered":
            day.consent = "given" if body["agree"] else "declined"
            day.consents.append({"agree": bool(body["agree"]), "language": body["language"],
                                 "text_sha256": body["text_sha256"], "event": seq})
            if body["agree"]:
                # A new person starts the instructions where the group stands.
                day.step = self.led_step.get(body["group"], 0)
        elif kind == "instruction_step":
            day.step = body["step"]
        elif kind == "comprehension_answered":
            question = next(q for q in self.study.comprehension if q.id == body["question"])
            day.attempts.setdefault(question.id, []).append(
                (body["choice"], body["choice"] == question.answer, seq))
        elif kind == "survey_answered":
            answer = normalise_answer(self.study, body["questionnaire"], body["item"], body["answer"])
            day.answers[(body["questionnaire"], body["item"])] = (answer, seq)
        elif kind == "risk_chosen":
            draw = float(risk_task_rng(self.seed, body["group"], body["seat"]).random())
            day.risk = (body["gamble"], "high" if draw < 0.5 else "low", seq)


def normalise_answer(study: Study, questionnaire: str, item_id: str, answer: Any) -> str:
    """The stored text of a valid answer; ``Refused`` saying what is allowed otherwise.

    single: "2"; multiple: "1;3" (sorted, possibly empty); number: "42"; scale: "1".."5";
    text: the text, trimmed.
    """
    found = [i for q in study.questionnaires if q.id == questionnaire for i in q.items if i.id == item_id]
    if not found:
        raise Refused("unknown_item", f"no item {questionnaire}/{item_id} in this study")
    item = found[0]

    def refuse() -> Refused:
        return Refused("invalid_answer",
                       f"{answer!r} is not an answer to {item_id}; allowed: {item.allowed()}")

    def whole(value: Any) -> int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise refuse()
        return value

    if item.kind == "text":
        if not isinstance(answer, str) or len(answer.strip()) > item.max_length:
            raise refuse()
        return answer.strip()
    if item.kind == "multiple":
        if not isinstance(answer, list) or len(answer) > len(item.choices):
            raise refuse()
        picked = sorted({whole(a) for a in answer})
        if any(not 1 <= a <= len(item.choices) for a in picked):
            raise refuse()
        return ";".join(str(a) for a in picked)
    value = whole(answer)
    low, high = {"single": (1, len(item.choices)), "scale": (1, 5), "number": (item.min, item.max)}[item.kind]
    if not low <= value <= high:
        raise refuse()
    return str(value)


# -- practice rounds ----------------------------------------------------------------


def practice_study(study: Study) -> Study:
    """The design the practice rounds play: one block of ``practice.rounds`` rounds under
    the first block's treatment, on their own stock, ending only after its last round."""
    first = study.blocks[0]
    block = BlockSpec(name=PRACTICE_BLOCK_NAME, treatment=first.treatment_for(0),
                      rounds=study.practice.rounds, show_others=first.show_others)
    resource = study.resource
    if study.practice.initial_stock is not None:
        resource = resource.model_copy(update={"initial_stock": study.practice.initial_stock})
    return study.model_copy(update={"blocks": (block,), "end": EndSpec(), "resource": resource})


def practice_start(study: Study, seed: int, group: int) -> GroupState:
    """A group's practice stock before its first practice round (its own threshold draw)."""
    practice = practice_study(study)
    stock = practice.resource.initial_stock
    return GroupState(group=group, block=0, round=0, stock=stock, regime=Regime.GOOD,
                      threshold=draw_threshold(study.threshold, practice_threshold_rng(seed, group)),
                      stock_path=(stock,))


# -- money ----------------------------------------------------------------------------


@dataclass(frozen=True)
class SeatMoney:
    """A seat's cash, line by line (each line from ``money.earnings``)."""

    game: Earnings  # the playing person: units taken, show-up fee included (0 when nobody played)
    risk_points: Decimal
    risk_cash: Decimal
    declined: int  # people who did not agree at this seat, each paid the show-up fee
    declined_cash: Decimal

    @property
    def total(self) -> Decimal:
        return self.game.cash + self.risk_cash + self.declined_cash


def risk_points(study: Study, day: SeatDay) -> Decimal:
    """Points won in the risk task (0 when unpaid or not chosen)."""
    task = study.risk_task
    if task is None or not task.paid or day.risk is None:
        return Decimal(0)
    gamble, outcome, _ = day.risk
    low, high = task.gambles[gamble - 1]
    return Decimal(high if outcome == "high" else low)


def seat_money(study: Study, units_taken: int, day: SeatDay) -> SeatMoney:
    """Every cash line of one seat.

    Risk points turn into cash at the study's exchange rate with no show-up fee (it is
    paid once, with the game line), rounded up like every amount; a person who declined
    is paid ``earnings(0)``, i.e. the show-up fee.
    """
    spec = study.payment
    played = study.consent is None or day.consent == "given"
    game = earnings(units_taken, spec) if played else Earnings(units_taken, Decimal(0), Decimal(0))
    points = risk_points(study, day)
    # The risk task's points are already points: one point per "unit", no second show-up fee.
    risk_spec = spec.model_copy(update={"points_per_unit": Decimal(1), "show_up_fee": Decimal(0)})
    risk_cash = earnings(int(points), risk_spec).cash if points else Decimal(0)
    declined = day.declined_count
    return SeatMoney(game, points, risk_cash, declined, declined * earnings(0, spec).cash)
