"""The phone's snapshot as the shell sends it: the core's validated model, drawn in the seat's language.

What a phone may receive is decided by ``game_logic.phone_snapshot.phone_snapshot``
alone; this module only supplies what the core cannot: the seat's language (the one
its phone chose, remembered when it connects, else the study's ``session.language``),
the talk countdown (the shell owns the clock) and a painter that draws the gauge, the
debrief charts and sentences from the already validated parts of the model.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

from babel import Locale
from flask import current_app
from flask_babel import force_locale, get_locale
from flask_babel import gettext as _

from ebbtide.game_logic.early_warning import health_reading
from ebbtide.game_logic.phone_snapshot import DebriefFacts, PhoneView, phone_snapshot
from ebbtide.game_logic.treatments import participant_view

from ..console.day import add_day_to_console_snapshot
from ..console.talk import talk_remaining
from ..pictures.chart import PHONE, stock_path_svg
from ..pictures.gauge import stock_gauge_svg
from ..pictures.numbers import numbers_in
from ..teach.revealed import chart_labels, plain_sentence


def gauge_labels() -> dict[str, str]:
    """The gauge's words (keys of ``gauge.DEFAULT_LABELS``) in the current language.

    Looked up once per language: every seat snapshot needs them, and thirteen gettext calls
    per snapshot were the largest cost of a round with hundreds of phones (docs/performance.md).
    """
    cache = current_app.extensions.setdefault("ebbtide_gauge_labels", {})
    language = str(get_locale())
    if language not in cache:
        cache[language] = _gauge_labels_now()
    return dict(cache[language])


GAUGE_CACHE_SIZE = 4096  # distinct (language, stock, danger) pictures kept; a session draws far fewer


def gauge_svg(language: str, view: dict[str, Any], id_prefix: str) -> str:
    """The stock gauge of a participant view in ``language``, drawn once per distinct picture."""
    key = (language, id_prefix, view["stock"], view["capacity"], str(view.get("unit", "")),
           json.dumps(view["danger"], sort_keys=True, default=str))
    return _drawn_once(key, language, lambda: view, id_prefix)


def _drawn_once(key: tuple, language: str, view: Callable[[], dict[str, Any]], id_prefix: str) -> str:
    """The gauge drawn under ``key``, which must name every part of the view the drawing reads.

    A gauge depends only on the stock, the capacity, the unit and the danger the view
    allows (``pictures.gauge``), so the five seats of a group, and the console's card of
    that group, share one drawing; drawing it for every snapshot was a fifth of the
    server's time in a round with hundreds of phones (docs/performance.md). ``view`` gives
    the view's dict, asked for only when the picture must be drawn.
    """
    cache = current_app.extensions.setdefault("ebbtide_gauges", {})
    svg = cache.get(key)
    if svg is None:
        with force_locale(language), numbers_in(language):
            svg = stock_gauge_svg(view(), labels=gauge_labels(), id_prefix=id_prefix)
        if len(cache) >= GAUGE_CACHE_SIZE:
            cache.clear()  # simpler than least-recently-used, and a refill costs one round
        cache[key] = svg
    return svg


def _gauge_labels_now() -> dict[str, str]:
    return {
        "stock": _("Stock"),
        "stock_of": _("of {capacity} {unit}"),
        "danger_level": _("Danger level {level}"),
        "danger_range": _("Danger level somewhere in {low} to {high}"),
        "danger_vague": _("Danger somewhere low"),
        "chance": _("If crossed: {chance} chance of collapse"),
        "health": _("Health"),
        "calm": _("Calm"),
        "watch": _("Watch"),
        "alarm": _("Alarm"),
        "falling": _("falling"),
        "steady": _("steady"),
        "rising": _("rising"),
    }


def remember_language(live, group: int, seat: int) -> None:
    """Called on a phone's connect: its page's language becomes the seat's (kept in the registry)."""
    language = str(get_locale() or live.study.session.language)
    current_app.extensions["ebbtide"].set_seat_language(live.session_id, group, seat, language)


def seat_language(live, group: int, seat: int) -> str:
    chosen = current_app.extensions["ebbtide"].seat_language(live.session_id, group, seat)
    return chosen or live.study.session.language


class PhonePainter:
    """Draws a snapshot's pictures and sentences in one language, from validated model parts only."""

    def __init__(self, language: str):
        self.language = language

    def gauge(self, view: PhoneView) -> str:
        # The key from the frozen model itself: dumping the whole view only when drawing.
        key = (self.language, "stock", view.stock, view.capacity, view.unit, view.danger.model_dump_json())
        return _drawn_once(key, self.language, lambda: view.model_dump(mode="json"), "stock")

    def debrief_sentence(self, facts: DebriefFacts, unit: str) -> str:
        with force_locale(self.language):
            return plain_sentence(facts.model_dump(mode="json"), unit)

    def debrief_chart(self, facts: DebriefFacts, capacity: int) -> str:
        # A phone is narrow: its picture leaves the what-if lines to the sentence.
        drawn = {"block": facts.part - 1, "stock_path": facts.stock_path, "threshold": facts.threshold,
                 "recovery_level": facts.recovery_level, "crossed_round": facts.crossed_round}
        with force_locale(self.language), numbers_in(self.language):
            return stock_path_svg(drawn, capacity, facts.degraded_rounds, labels=chart_labels(),
                                  id_prefix=f"mine-b{facts.part}", layout=PHONE)

    def caution(self) -> str:
        with force_locale(self.language):
            return _("This game is a teaching device: its stock and danger level are invented and "
                     "are not a forecast for any real fishery, forest or pasture.")


def seat_snapshot_payload(live, group: int, seat: int) -> dict[str, Any]:
    """What the ``snapshot`` event carries to a seat's phones: the validated model, as JSON."""
    language = seat_language(live, group, seat)
    left = talk_remaining(live, group)
    model = phone_snapshot(live.state, group, seat, language=language, talk_remaining=left,
                           painter=PhonePainter(language))
    return model.payload()


def add_to_console_snapshot(live, snapshot: dict[str, Any]) -> dict[str, Any]:
    """Per group: a small gauge as its seats see it, the talk countdown and the signal's parts."""
    state = live.state
    with force_locale(live.study.session.language), numbers_in(live.study.session.language):
        for g, group in enumerate(snapshot["groups"]):
            progress = state.groups[g]
            view = participant_view(live.study, progress.state, 0, progress.last_outcome, 0)
            group["gauge_svg"] = gauge_svg(live.study.session.language, view, f"console-g{g + 1}")
            left = talk_remaining(live, g)
            group["talk_remaining"] = None if left is None else round(left, 1)
            if group["treatment"] == "signal":
                reading = health_reading(progress.state.stock_path, live.study.resource.capacity)
                group["hidden"]["health"] = {
                    "score": round(reading.score, 2), "level": round(reading.level, 2),
                    "pace": round(reading.pace, 2), "slowing": round(reading.slowing, 2),
                    "band": reading.band, "reasons": list(reading.reasons),
                }
    snapshot["debrief_revealed"] = state.debrief_revealed
    snapshot["teaching_view"] = live.study.session.teaching_view
    # Consent, stages, stuck seats and the day's clock (console/day.py).
    return add_day_to_console_snapshot(live, snapshot)


def phone_more_strings() -> dict[str, str]:
    """Words the phone's script shows for the gauge, talk pauses, pictures and the debrief."""
    return {
        "reason_intro": _("Why:"),
        "reason_low_stock": _("the stock is low"),
        "reason_falling_fast": _("the stock is falling fast"),
        "reason_slow_recovery": _("the stock is slow to recover"),
        "signal_note": _("This is a health reading of the stock, not a danger line."),
        "talk_title": _("Talk with your group"),
        "talk_opens": _("Choices open when the countdown ends."),
        "talk_seconds_left": _("%(seconds)s seconds left"),
        "show_pictures": _("Show pictures"),
        "show_words": _("Show words"),
        "take_n": _("Take %(n)s"),
        "take_none": _("Take nothing"),
        "others_none": _("The others' choices are not shown, only the group's total."),
        "debrief_title": _("The danger level, revealed"),
        "debrief_part": _("Part %(n)s: %(name)s"),
        "debrief_part_plain": _("Part %(n)s"),
        "debrief_level": _("The danger level was %(level)s; above %(recovery)s the stock recovers."),
        "debrief_crossed": _("Your group's stock crossed it in round %(round)s."),
        "debrief_never": _("Your group's stock never crossed it."),
        "debrief_none": _("No part of the game had finished."),
        **field_day_strings(),
    }


def field_day_strings() -> dict[str, str]:
    """Words of the field day's phone screens (static/phone-day.js)."""
    return {
        "day_consent_title": _("Before we start"),
        "day_agree": _("I agree"),
        "day_decline": _("I do not agree"),
        "day_declined": _("Thank you. You will not play; you are paid the show-up fee."),
        "day_hand_back": _("Please give the seat card back to the facilitator."),
        "day_new_person": _("A new person takes this seat"),
        "day_step": _("Screen %(n)s of %(count)s"),
        "day_listen": _("Listen"),
        "day_back": _("Back"),
        "day_next": _("Next"),
        "day_done": _("Done"),
        "day_led": _("The facilitator moves these screens for the whole group."),
        "day_question": _("Question %(n)s of %(count)s"),
        "day_try_again": _("Please try again."),
        "day_check": _("Check my answer"),
        "day_item": _("Question %(n)s of %(count)s"),
        "day_send": _("Send"),
        "day_answer_first": _("Please answer first."),
        "day_scale_1": _("Disagree strongly"),
        "day_scale_2": _("Disagree"),
        "day_scale_3": _("Neither"),
        "day_scale_4": _("Agree"),
        "day_scale_5": _("Agree strongly"),
        "day_risk_title": _("Choose an envelope"),
        "day_gamble": _("Envelope %(n)s: %(low)s or %(high)s points"),
        "day_risk_unpaid": _("This choice is not paid."),
        "day_risk_low": _("Envelope %(n)s: the coin gave the lower amount, %(points)s points."),
        "day_risk_high": _("Envelope %(n)s: the coin gave the higher amount, %(points)s points."),
        "day_practice": _("Practice round: it pays nothing"),
        "day_line_game": _("The game, with the show-up fee"),
        "day_line_risk": _("The envelope"),
        "day_line_declined": _("Show-up fee"),
        "day_total": _("To collect"),
        "day_collect": _("Show your seat card to the facilitator to be paid."),
    }


def participant_title(study) -> str:
    """The session's name as participants read it (phone, seat cards, projector), in the page's language.

    The study's ``session.label``; else a neutral name, never the researcher's ``session.title``.
    """
    return study.session_label(str(get_locale() or study.session.language)) or _("Harvest game")


def language_choices(current: str, offered: tuple[str, ...]) -> list[dict[str, str]]:
    """The study's languages, each named in itself, for the phone's switcher."""
    return [
        {"code": code, "name": Locale.parse(code).get_display_name(code).capitalize(),
         "current": code == current}
        for code in offered
    ]
