"""Study design files: TOML in, a validated, frozen ``Study`` out.

Every number of a session lives in the study file. Validation collects every
problem at once and names, for each, the key, what it holds and what is allowed,
so a researcher can fix the file before the trip rather than in the village hall.
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from decimal import Decimal
from pathlib import Path
from typing import Annotated, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    StrictBool,
    ValidationError,
    model_validator,
)

from .errors import StudyError
from .field_day_spec import (
    ComprehensionQuestion,
    ConsentSpec,
    InstructionStep,
    PracticeSpec,
    Questionnaire,
    RiskTaskSpec,
    language_problems,
)

TREATMENTS = ("none", "vague", "range", "exact", "risk", "signal")
GROWTH_LAWS = ("logistic", "allee", "grazing", "step")
THRESHOLD_RULES = ("none", "fixed", "uniform")
END_RULES = ("fixed", "random")

Treatment = Literal["none", "vague", "range", "exact", "risk", "signal"]
LANGUAGE_CODE = re.compile(r"[a-z]{2,3}(_[A-Z]{2})?")
LABEL_CHARS = 60


def _label_pairs(value: object) -> object:
    """A TOML table ``{ en = "...", es = "..." }`` -> sorted (language, text) pairs (hashable, frozen)."""
    if value is None or isinstance(value, tuple):
        return value
    if not isinstance(value, dict):
        raise ValueError(f"holds {value!r}; allowed: a table of texts by language, e.g. {{ en = \"...\" }}")
    for language, text in value.items():
        if not LANGUAGE_CODE.fullmatch(language):
            raise ValueError(f"{language!r} is not a language code; allowed: codes such as en, es, fr")
        if not isinstance(text, str) or not 1 <= len(text.strip()) <= LABEL_CHARS:
            raise ValueError(f"the {language!r} text holds {text!r}; allowed: 1 to {LABEL_CHARS} characters")
    return tuple(sorted(value.items()))


# What participants read on their phones, seat cards and the projector, per language.
# Separate from the researcher's ``session.title`` and block ``name``, which may name
# the design ("low-threshold") and so never reach participants.
ParticipantLabel = Annotated[tuple[tuple[str, str], ...], BeforeValidator(_label_pairs)]


def label_texts(label: ParticipantLabel | None) -> dict[str, str]:
    """A label's texts by language (empty when the study gave none)."""
    return dict(label or ())
PositiveFloat = Annotated[float, Field(gt=0)]
Probability = Annotated[float, Field(ge=0, le=1)]
PositiveDecimal = Annotated[Decimal, Field(gt=0)]


class _Frozen(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")


class SessionSpec(_Frozen):
    """Who, where and how long: the parts of the design that are not dynamics."""

    id: Annotated[str, Field(pattern=r"^[a-z0-9][a-z0-9-]{1,47}$")]
    title: Annotated[str, Field(min_length=1, max_length=120)]
    label: ParticipantLabel | None = None
    place: str = ""
    language: str = "en"
    languages: tuple[str, ...] = ("en",)
    setup_minutes: Annotated[float, Field(ge=0, le=240)] = 20
    minutes_per_round: Annotated[float, Field(gt=0, le=30)] = 2.5
    debrief_minutes: Annotated[float, Field(ge=0, le=120)] = 15
    # The live teaching view shows every group's stock to the whole room, which
    # changes what participants know: off unless the study asks for it. Strict,
    # so "yes" or 1 is refused rather than read as true.
    teaching_view: StrictBool = False

    @model_validator(mode="after")
    def _language_offered(self):
        if self.language not in self.languages:
            raise ValueError(
                f"session.language holds {self.language!r}, which is not among "
                f"session.languages {list(self.languages)}"
            )
        _check_label_languages("session.label", self.label, self.languages)
        return self


def _check_label_languages(where: str, label: ParticipantLabel | None, offered: tuple[str, ...]) -> None:
    unknown = sorted(set(label_texts(label)) - set(offered))
    if unknown:
        raise ValueError(
            f"{where} has text in {unknown}, which is not among session.languages {list(offered)}; "
            "add the language there or drop its text"
        )


class GroupsSpec(_Frozen):
    """How many groups play at once and how many seats each has."""

    count: Annotated[int, Field(ge=1, le=200)]
    seats_per_group: Annotated[int, Field(ge=2, le=12)]


class GrowthSpec(_Frozen):
    """Regrowth law of the good regime; see ``game_logic.resource`` for formulas."""

    law: Literal["logistic", "allee", "grazing", "step"] = "logistic"
    r: Annotated[float, Field(gt=0, le=4)] = 0.5
    allee_point: Annotated[float, Field(gt=0)] | None = None
    consumption: Annotated[float, Field(ge=0)] | None = None
    half_saturation: Annotated[float, Field(gt=0)] | None = None
    step_at: Annotated[float, Field(gt=0)] | None = None
    below_factor: Annotated[float, Field(ge=0, le=1)] = 0.2

    @model_validator(mode="after")
    def _law_parameters(self):
        needed = {
            "allee": ("allee_point",),
            "grazing": ("consumption", "half_saturation"),
            "step": ("step_at",),
        }.get(self.law, ())
        missing = [name for name in needed if getattr(self, name) is None]
        if missing:
            raise ValueError(
                f"growth law {self.law!r} needs resource.growth."
                + ", resource.growth.".join(missing)
            )
        return self


class ResourceSpec(_Frozen):
    """The shared stock: capacity, start, per-seat harvest cap and regrowth."""

    unit: Annotated[str, Field(min_length=1, max_length=30)] = "units"
    # The unit as participants read it, per language (``unit`` when a language has none).
    unit_label: ParticipantLabel | None = None
    capacity: Annotated[int, Field(ge=10, le=100_000)] = 100
    initial_stock: Annotated[int, Field(ge=1)] = 80
    max_harvest: Annotated[int, Field(ge=1, le=100)] = 10
    degraded_growth_factor: Annotated[float, Field(ge=0, lt=1)] = 0.2
    growth: GrowthSpec = GrowthSpec()

    @model_validator(mode="after")
    def _within_capacity(self):
        if self.initial_stock > self.capacity:
            raise ValueError(
                f"resource.initial_stock holds {self.initial_stock}, above "
                f"resource.capacity {self.capacity}; allowed: 1..{self.capacity}"
            )
        if self.growth.allee_point is not None and self.growth.allee_point >= self.capacity:
            raise ValueError("resource.growth.allee_point must lie below resource.capacity")
        return self


class ThresholdSpec(_Frozen):
    """The hidden collapse threshold T, its recovery level T + gap and the flip risk."""

    rule: Literal["none", "fixed", "uniform"] = "uniform"
    value: Annotated[float, Field(gt=0)] | None = None
    low: Annotated[float, Field(gt=0)] | None = None
    high: Annotated[float, Field(gt=0)] | None = None
    recovery_gap: Annotated[float, Field(ge=0)] = 15
    flip_probability: Probability = 1.0
    shown_range: tuple[float, float] | None = None
    redraw_each_block: bool = False

    @model_validator(mode="after")
    def _rule_parameters(self):
        if self.rule == "fixed" and self.value is None:
            raise ValueError("threshold.rule 'fixed' needs threshold.value")
        if self.rule == "uniform":
            if self.low is None or self.high is None:
                raise ValueError("threshold.rule 'uniform' needs threshold.low and threshold.high")
            if not self.low < self.high:
                raise ValueError(
                    f"threshold.low ({self.low}) must be below threshold.high ({self.high})"
                )
        if self.shown_range is not None:
            lo, hi = self.shown_range
            if not lo < hi:
                raise ValueError(f"threshold.shown_range {list(self.shown_range)} must be [low, high]")
            if self.rule == "fixed" and not lo <= self.value <= hi:
                raise ValueError(
                    f"threshold.value {self.value} lies outside threshold.shown_range "
                    f"{list(self.shown_range)}: participants would be told a false range"
                )
            if self.rule == "uniform" and (self.low < lo or self.high > hi):
                raise ValueError(
                    f"threshold.shown_range {list(self.shown_range)} must contain "
                    f"[threshold.low, threshold.high] = [{self.low}, {self.high}]"
                )
        return self

    @property
    def support(self) -> tuple[float, float] | None:
        """Interval of values the threshold can take (None when there is none)."""
        if self.rule == "fixed":
            return (self.value, self.value)
        if self.rule == "uniform":
            return (self.low, self.high)
        return None

    @property
    def range_shown(self) -> tuple[float, float] | None:
        """Interval told to participants under the ``range`` treatment."""
        if self.shown_range is not None:
            return tuple(self.shown_range)
        if self.rule == "uniform":
            return (self.low, self.high)
        return None


class EndSpec(_Frozen):
    """When a block ends: its fixed length, or random stopping; exhaustion always may."""

    rule: Literal["fixed", "random"] = "fixed"
    continuation_probability: Annotated[float, Field(gt=0, lt=1)] | None = None
    min_rounds: Annotated[int, Field(ge=1)] = 1
    stop_when_exhausted: bool = True

    @model_validator(mode="after")
    def _random_needs_probability(self):
        if self.rule == "random" and self.continuation_probability is None:
            raise ValueError("end.rule 'random' needs end.continuation_probability (0 < p < 1)")
        return self


class BlockSpec(_Frozen):
    """A run of rounds under one information treatment and its switches."""

    name: Annotated[str, Field(min_length=1, max_length=40)]
    label: ParticipantLabel | None = None
    treatment: Treatment = "none"
    # Between-groups designs: group g plays treatments[g % len(treatments)].
    treatments: Annotated[tuple[Treatment, ...], Field(min_length=1, max_length=6)] | None = None
    rounds: Annotated[int, Field(ge=1, le=100)] = 10
    talk: bool = False
    talk_seconds: Annotated[int, Field(ge=10, le=1800)] = 120
    show_others: bool = False
    reset_stock: bool = True

    @model_validator(mode="after")
    def _one_way_to_say_it(self):
        if self.treatments is not None and "treatment" in self.model_fields_set:
            raise ValueError(
                f"block {self.name!r} sets both treatment and treatments; use one of them"
            )
        return self

    def treatment_for(self, group: int) -> str:
        """Treatment of group ``group`` (0-based) in this block, by rotation."""
        if self.treatments is None:
            return self.treatment
        return self.treatments[group % len(self.treatments)]

    @property
    def all_treatments(self) -> tuple[str, ...]:
        return self.treatments if self.treatments is not None else (self.treatment,)


class PaymentSpec(_Frozen):
    """Points per unit taken and their conversion to real money.

    Decimal-valued: ``parse_study`` reads this table from the file's own digits, so
    0.1 is exactly one tenth (``game_logic.money`` computes every amount from these).
    """

    points_per_unit: Annotated[Decimal, Field(gt=0)] = Decimal(1)
    currency: Annotated[str, Field(min_length=1, max_length=20)] = "marks"
    exchange_rate: Annotated[Decimal, Field(ge=0)] = Decimal(1)
    show_up_fee: Annotated[Decimal, Field(ge=0)] = Decimal(0)
    round_up_to: Annotated[Decimal, Field(gt=0)] = Decimal(1)
    # Notes and coins the researcher will carry, for the payment sheet's packing list;
    # when absent, a 1-2-5 series from round_up_to is assumed (game_logic.money).
    denominations: Annotated[tuple[PositiveDecimal, ...], Field(min_length=1, max_length=20)] | None = None

    @model_validator(mode="after")
    def _denominations_pay_every_amount(self):
        if self.denominations is None:
            return self
        values = list(self.denominations)
        shown = [_plain(v) for v in values]
        if len(set(values)) != len(values):
            raise ValueError(f"payment.denominations {shown} lists a value twice")
        smallest = min(values)
        # Every cash amount is a multiple of round_up_to; if that is a multiple of the
        # smallest note, the smallest note alone can pay it (the packing list is exact).
        if self.round_up_to % smallest != 0:
            raise ValueError(
                f"payment.denominations {shown} cannot pay every amount: "
                f"payment.round_up_to ({_plain(self.round_up_to)}) must be a whole multiple of the "
                f"smallest denomination ({_plain(smallest)})"
            )
        return self


def _plain(value: Decimal) -> str:
    return format(value, "f")


class Study(_Frozen):
    """A whole validated design. Frozen: the running session never changes it."""

    session: SessionSpec
    groups: GroupsSpec
    resource: ResourceSpec = ResourceSpec()
    threshold: ThresholdSpec = ThresholdSpec(low=25, high=45)
    end: EndSpec = EndSpec()
    blocks: Annotated[tuple[BlockSpec, ...], Field(min_length=1, max_length=12)]
    payment: PaymentSpec = PaymentSpec()
    # The field day around the game (game_logic/field_day_spec.py); all optional.
    consent: ConsentSpec | None = None
    instructions: Annotated[tuple[InstructionStep, ...], Field(max_length=30)] = ()
    comprehension: Annotated[tuple[ComprehensionQuestion, ...], Field(max_length=20)] = ()
    practice: PracticeSpec = PracticeSpec()
    questionnaires: Annotated[tuple[Questionnaire, ...], Field(max_length=6)] = ()
    risk_task: RiskTaskSpec | None = None
    source_text: str = Field(default="", exclude=True, repr=False)
    # The study folder (pictures and sounds live there); empty for a study given as text.
    folder: str = Field(default="", exclude=True, repr=False)

    @model_validator(mode="after")
    def _consistent(self):
        needs_level = [
            b.name
            for b in self.blocks
            if set(b.all_treatments) & {"vague", "range", "exact", "risk"}
        ]
        if needs_level and self.threshold.rule == "none":
            raise ValueError(
                f"blocks {needs_level} tell participants about a danger level, but "
                "threshold.rule is 'none'; allowed: 'fixed' or 'uniform'"
            )
        uses_range = any("range" in b.all_treatments for b in self.blocks)
        if uses_range and self.threshold.range_shown is None:
            raise ValueError(
                "a 'range' block needs an interval to show: set threshold.shown_range "
                "(or use threshold.rule 'uniform', whose low..high is shown)"
            )
        names = [b.name for b in self.blocks]
        if len(set(names)) != len(names):
            raise ValueError(f"block names must be unique, got {names}")
        _check_label_languages("resource.unit_label", self.resource.unit_label, self.session.languages)
        for i, block in enumerate(self.blocks):
            _check_label_languages(f"blocks.{i}.label", block.label, self.session.languages)
        support = self.threshold.support
        if support is not None:
            top = support[1] + self.threshold.recovery_gap
            if top >= self.resource.capacity:
                raise ValueError(
                    f"recovery level (threshold + recovery_gap, up to {top:g}) must stay below "
                    f"resource.capacity {self.resource.capacity}, or a degraded stock never recovers"
                )
        field_day = language_problems(self)
        if field_day:
            raise ValueError("; ".join(field_day))
        return self

    @property
    def seats(self) -> int:
        return self.groups.seats_per_group

    @property
    def total_rounds(self) -> int:
        """Rounds in the whole session if every block runs to its length."""
        return sum(block.rounds for block in self.blocks)

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.source_text.encode("utf-8")).hexdigest()

    def session_label(self, language: str) -> str | None:
        """The session's participant-facing title in ``language`` (else the session's language), or None."""
        return _pick(self.session.label, language, self.session.language)

    def block_label(self, block: int, language: str) -> str | None:
        """Block ``block``'s (0-based) participant-facing label, as ``session_label``; None if none given.

        Never the researcher's block ``name``: with no label, the phone says only "Part 2".
        """
        return _pick(self.blocks[block].label, language, self.session.language)

    def unit_label(self, language: str) -> str:
        """The resource's unit as participants read it in ``language``; else ``resource.unit``."""
        return _pick(self.resource.unit_label, language, self.session.language) or self.resource.unit


def _pick(label: ParticipantLabel | None, language: str, fallback: str) -> str | None:
    texts = label_texts(label)
    return texts.get(language) or texts.get(fallback)


def participant_text_warnings(study: Study) -> list[str]:
    """Participant-facing labels that would tell the design, or that lack an offered language."""
    labelled = [("session.label", study.session.label)]
    labelled += [(f"blocks.{i}.label", b.label) for i, b in enumerate(study.blocks)]
    labelled.append(("resource.unit_label", study.resource.unit_label))
    researcher_names = [b.name for b in study.blocks]
    warnings = []
    for where, label in labelled:
        for language, text in label_texts(label).items():
            told = sorted(set(re.findall(r"\w+", text.lower())) & set(TREATMENTS))
            if told:
                warnings.append(
                    f"{where}.{language} = {text!r} names the treatment {', '.join(told)}: "
                    "participants would read the design; choose a neutral label"
                )
            named = [n for n in researcher_names if re.search(rf"(?<!\w){re.escape(n)}(?!\w)", text, re.I)]
            if named or text.strip().lower() == study.session.title.strip().lower():
                what = f"block name {named[0]!r}" if named else "session.title"
                warnings.append(
                    f"{where}.{language} = {text!r} repeats the researcher's {what}: participants "
                    "would read the design; choose a neutral label"
                )
        missing = sorted(set(study.session.languages) - set(label_texts(label))) if label else []
        if missing:
            warnings.append(
                f"{where} has no text in {missing}: phones in that language show the "
                f"{study.session.language!r} text"
            )
    return warnings


def _describe(error: dict) -> str:
    key = ".".join(str(part) for part in error["loc"]) or "(top level)"
    message = error["msg"].removeprefix("Value error, ")
    held = error.get("input")
    held = _plain(held) if isinstance(held, Decimal) else repr(held)
    if error["type"] == "extra_forbidden":
        return f"{key}: unknown key (holds {held}); check the spelling"
    if error["type"] == "missing":
        return f"{key}: required key is missing"
    if error["type"] == "value_error":
        return message if not error["loc"] else f"{key}: {message}"
    return f"{key}: holds {held}; allowed: {message}"


def parse_study(text: str) -> Study:
    """Validate study TOML text; raise ``StudyError`` listing every problem."""
    try:
        raw = tomllib.loads(text)
        # Money is read from the file's own digits, not the nearest binary float.
        exact = tomllib.loads(text, parse_float=Decimal)
    except tomllib.TOMLDecodeError as exc:
        raise StudyError([f"not valid TOML: {exc}"]) from exc
    if "payment" in exact:
        raw["payment"] = exact["payment"]
    try:
        study = Study.model_validate(raw)
    except ValidationError as exc:
        raise StudyError([_describe(e) for e in exc.errors()]) from exc
    return study.model_copy(update={"source_text": text})


STUDY_FOLDER_FILE = "study.toml"


def load_study(path: str | Path) -> Study:
    """Read and validate a study file, or a study folder (its ``study.toml`` plus the
    pictures and sounds it names), from disk."""
    path = Path(path)
    if path.is_dir():
        path = path / STUDY_FOLDER_FILE
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise StudyError([f"cannot read {path}: {exc.strerror}"]) from exc
    return parse_study(text).model_copy(update={"folder": str(path.parent.resolve())})
