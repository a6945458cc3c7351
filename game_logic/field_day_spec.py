"""The field day around the game, as the study describes it: consent, instructions,
comprehension questions, practice rounds, questionnaires and a risk-attitude task.

Every section is optional; a study without them plays as before. Every text holds
one version per study language (``{en = "...", es = "..."}``), checked against
``session.languages`` so that no phone ever falls back to a language its reader may
not know. Pictures and sounds are paths inside the study folder; ``missing_media``
lists the ones that are not there, so ``ebbtide check`` names them before the trip.
"""

from __future__ import annotations

from pathlib import Path, PurePosixPath
from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

PICTURE_SUFFIXES = (".png", ".jpg", ".jpeg", ".svg", ".webp")
SOUND_SUFFIXES = (".wav", ".mp3", ".ogg", ".m4a")

# Text per language code: {"en": "...", "es": "..."}; a non-empty string each.
LanguageCode = Annotated[str, Field(pattern=r"^[a-z]{2,3}([_-][A-Za-z0-9]{2,8})?$")]
Texts = dict[LanguageCode, Annotated[str, Field(min_length=1, max_length=4000)]]


class _Frozen(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")


def _media_path(value: str, suffixes: tuple[str, ...], what: str) -> str:
    path = PurePosixPath(value)
    if path.is_absolute() or ".." in path.parts or "\\" in value or not value:
        raise ValueError(f"{what} {value!r} must be a path inside the study folder (no '..', not absolute)")
    if path.suffix.lower() not in suffixes:
        raise ValueError(f"{what} {value!r} has an unknown type; allowed: {', '.join(suffixes)}")
    return value


class Media(_Frozen):
    """An optional picture, and an optional sound per language, beside a text."""

    picture: str | None = None
    sound: dict[str, str] | None = None  # language -> sound file recorded in that language

    @field_validator("picture")
    @classmethod
    def _picture(cls, value):
        return None if value is None else _media_path(value, PICTURE_SUFFIXES, "picture")

    @field_validator("sound")
    @classmethod
    def _sound(cls, value):
        if value is None:
            return None
        return {lang: _media_path(path, SOUND_SUFFIXES, "sound") for lang, path in value.items()}


class ConsentSpec(_Frozen):
    """The consent text and what happens to a seat whose person does not agree."""

    text: Texts
    # replacement: another person may take the seat card and consents afresh;
    # absent: the group plays on without the seat (its harvests recorded as absent).
    on_decline: Literal["replacement", "absent"] = "absent"


class InstructionStep(Media):
    text: Texts


class ComprehensionQuestion(Media):
    id: Annotated[str, Field(pattern=r"^[a-z0-9][a-z0-9_-]{0,31}$")]
    text: Texts
    choices: Annotated[tuple[Texts, ...], Field(min_length=2, max_length=6)]
    answer: Annotated[int, Field(ge=1)]  # 1-based number of the right choice
    feedback: Texts  # shown after a wrong answer, before the second try

    @model_validator(mode="after")
    def _answer_is_a_choice(self):
        if self.answer > len(self.choices):
            raise ValueError(
                f"question {self.id!r}: answer {self.answer} is not a choice; allowed: 1..{len(self.choices)}"
            )
        return self


class PracticeSpec(_Frozen):
    """Unpaid practice rounds on their own stock, before the first block."""

    rounds: Annotated[int, Field(ge=0, le=10)] = 0
    initial_stock: Annotated[int, Field(ge=1)] | None = None


ItemKind = Literal["single", "multiple", "number", "scale", "text"]
# The agree-disagree scale has five points, 1 = disagree strongly ... 5 = agree strongly.
SCALE_POINTS = 5


class SurveyItem(Media):
    id: Annotated[str, Field(pattern=r"^[a-z0-9][a-z0-9_-]{0,31}$")]
    kind: ItemKind
    text: Texts
    choices: Annotated[tuple[Texts, ...], Field(max_length=12)] = ()
    min: int | None = None
    max: int | None = None
    max_length: Annotated[int, Field(ge=1, le=1000)] = 300

    @model_validator(mode="after")
    def _kind_parameters(self):
        if self.kind in ("single", "multiple") and len(self.choices) < 2:
            raise ValueError(f"item {self.id!r} ({self.kind}) needs at least 2 choices")
        if self.kind not in ("single", "multiple") and self.choices:
            raise ValueError(f"item {self.id!r} ({self.kind}) takes no choices")
        if self.kind == "number":
            if self.min is None or self.max is None or not self.min <= self.max:
                raise ValueError(f"item {self.id!r} (number) needs min <= max")
        elif self.min is not None or self.max is not None:
            raise ValueError(f"item {self.id!r} ({self.kind}) takes no min or max")
        return self

    def allowed(self) -> str:
        """What answers are allowed, in words for the codebook and for refusals."""
        if self.kind == "single":
            return f"one choice number, 1..{len(self.choices)}"
        if self.kind == "multiple":
            return f"choice numbers from 1..{len(self.choices)}, separated by ';' (none allowed)"
        if self.kind == "number":
            return f"a whole number from {self.min} to {self.max}"
        if self.kind == "scale":
            return f"1 (disagree strongly) .. {SCALE_POINTS} (agree strongly)"
        return f"free text, at most {self.max_length} characters"


class Questionnaire(_Frozen):
    id: Annotated[str, Field(pattern=r"^[a-z0-9][a-z0-9_-]{0,31}$")]
    when: Literal["before", "after"]
    items: Annotated[tuple[SurveyItem, ...], Field(min_length=1, max_length=60)]

    @model_validator(mode="after")
    def _unique_items(self):
        ids = [item.id for item in self.items]
        if len(set(ids)) != len(ids):
            raise ValueError(f"questionnaire {self.id!r}: item ids must be unique, got {ids}")
        return self


class RiskTaskSpec(Media):
    """One choice among 50/50 gambles (the Eckel & Grossman 2002 single-choice list).

    Each gamble is [low, high] whole points, each paid with chance one half; one draw
    per seat from the session's seed decides which. Paid points become cash with the
    study's exchange rate, on their own line of the payment sheet.
    """

    text: Texts
    gambles: Annotated[tuple[tuple[int, int], ...], Field(min_length=2, max_length=8)]
    paid: bool = True

    @field_validator("gambles")
    @classmethod
    def _ordered(cls, gambles):
        for low, high in gambles:
            if not 0 <= low <= high:
                raise ValueError(f"gamble {[low, high]} must be [low, high] whole points, 0 <= low <= high")
        return gambles


def _texts(model: BaseModel, where: str):
    """Yield (where, Texts) for every text of a section, recursively."""
    for name, value in model:
        if name in ("text", "feedback") and isinstance(value, dict):
            yield f"{where}.{name}", value
        elif name == "choices":
            for i, choice in enumerate(value):
                yield f"{where}.choices[{i + 1}]", choice
        elif name == "items":
            for item in value:
                yield from _texts(item, f"{where}.items.{item.id}")


def field_day_sections(study) -> list[tuple[str, BaseModel]]:
    """(name, section) of every field-day section the study has."""
    sections: list[tuple[str, BaseModel]] = []
    if study.consent is not None:
        sections.append(("consent", study.consent))
    sections += [(f"instructions[{i + 1}]", s) for i, s in enumerate(study.instructions)]
    sections += [(f"comprehension.{q.id}", q) for q in study.comprehension]
    sections += [(f"questionnaires.{q.id}", q) for q in study.questionnaires]
    if study.risk_task is not None:
        sections.append(("risk_task", study.risk_task))
    return sections


def language_problems(study) -> list[str]:
    """Every text that lacks a study language (or has one the study does not offer)."""
    offered = set(study.session.languages)
    problems = []
    for where, section in field_day_sections(study):
        for place, texts in _texts(section, where):
            missing = sorted(offered - set(texts))
            extra = sorted(set(texts) - offered)
            if missing:
                problems.append(f"{place}: no text in {', '.join(missing)}; every study language needs one")
            if extra:
                problems.append(f"{place}: text in {', '.join(extra)}, which is not in session.languages")
        sounds = getattr(section, "sound", None) or {}
        extra = sorted(set(sounds) - offered)
        if extra:
            problems.append(f"{where}.sound: language {', '.join(extra)} is not in session.languages")
    ids = [q.id for q in study.comprehension]
    if len(set(ids)) != len(ids):
        problems.append(f"comprehension: question ids must be unique, got {ids}")
    ids = [q.id for q in study.questionnaires]
    if len(set(ids)) != len(ids):
        problems.append(f"questionnaires: ids must be unique, got {ids}")
    if study.practice.initial_stock is not None and study.practice.initial_stock > study.resource.capacity:
        problems.append(
            f"practice.initial_stock holds {study.practice.initial_stock}, above resource.capacity "
            f"{study.resource.capacity}"
        )
    return problems


def media_files(study) -> list[str]:
    """Every picture and sound file the study names, in study order, once each."""
    seen: dict[str, None] = {}
    for _, section in field_day_sections(study):
        parts = [section, *getattr(section, "items", ())]
        for part in parts:
            picture = getattr(part, "picture", None)
            if picture:
                seen[picture] = None
            for path in (getattr(part, "sound", None) or {}).values():
                seen[path] = None
    return list(seen)


def missing_media(study, folder: str | Path) -> list[str]:
    """The named files that are not in ``folder`` (the study folder)."""
    root = Path(folder)
    return [path for path in media_files(study) if not (root / path).is_file()]


# Minutes planned per part of the day when the study names none (common practice, no
# source: a consent text read aloud ~3 min, ~1 min per screen read aloud, ~30 s per item).
CONSENT_MINUTES = 3.0
MINUTES_PER_STEP = 1.0
MINUTES_PER_QUESTION = 1.0
MINUTES_PER_ITEM = 0.5
RISK_TASK_MINUTES = 3.0
STAGE_NAMES = ("setup", "consent", "instructions", "practice", "blocks", "questionnaire", "payment")


def day_plan(study) -> list[tuple[str, float]]:
    """(stage, planned minutes) for the day's stages in order, as ``ebbtide check`` prints
    them and the console measures elapsed time against them."""
    s = study.session
    talk = sum(b.rounds * b.talk_seconds / 60 for b in study.blocks if b.talk)
    before = sum(len(q.items) for q in study.questionnaires if q.when == "before")
    after = sum(len(q.items) for q in study.questionnaires if q.when == "after")
    return [
        ("setup", float(s.setup_minutes)),
        ("consent", CONSENT_MINUTES if study.consent is not None else 0.0),
        ("instructions", MINUTES_PER_STEP * len(study.instructions)
         + MINUTES_PER_QUESTION * len(study.comprehension) + MINUTES_PER_ITEM * before),
        ("practice", study.practice.rounds * s.minutes_per_round),
        ("blocks", study.total_rounds * s.minutes_per_round + talk),
        ("questionnaire", MINUTES_PER_ITEM * after + (RISK_TASK_MINUTES if study.risk_task else 0.0)),
        ("payment", float(s.debrief_minutes)),
    ]
