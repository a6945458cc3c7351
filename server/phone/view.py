"""What the shell adds to a seat's snapshot: the stock picture, the talk countdown, a revealed debrief.

Every addition is drawn from the treatment's ``participant_view`` (the gauge reads
the view dict only) or is neutral pacing state; the debrief comes only after the
facilitator revealed it. Words are in the seat's own language: the one its phone
chose (remembered when it connects), else the study's ``session.language``.
"""

from __future__ import annotations

from typing import Any

from babel import Locale
from flask import current_app
from flask_babel import force_locale, get_locale
from flask_babel import gettext as _

from ebbtide.game_logic.early_warning import health_reading
from ebbtide.game_logic.field_day_view import field_day_screen
from ebbtide.game_logic.treatments import participant_view

from ..console.day import add_day_to_console_snapshot
from ..console.talk import talk_remaining
from ..pictures.gauge import stock_gauge_svg
from ..teach.revealed import phone_debrief


def gauge_labels() -> dict[str, str]:
    """The gauge's words (keys of ``gauge.DEFAULT_LABELS``) in the current language."""
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


def _languages() -> dict[tuple[str, int, int], str]:
    return current_app.extensions.setdefault("ebbtide_seat_languages", {})


def remember_language(live, group: int, seat: int) -> None:
    """Called on a phone's connect: its page's language becomes the seat's."""
    _languages()[(live.session_id, group, seat)] = str(get_locale() or live.study.session.language)


def seat_language(live, group: int, seat: int) -> str:
    return _languages().get((live.session_id, group, seat), live.study.session.language)


def add_to_seat_snapshot(live, group: int, seat: int, snapshot: dict[str, Any]) -> dict[str, Any]:
    """The snapshot plus ``gauge_svg``, ``talk_remaining`` (seconds or None) and ``debrief``."""
    language = seat_language(live, group, seat)
    # The field day's stage and its words (the core's gate: game_logic/field_day_view.py).
    snapshot["field_day"] = field_day_screen(live.state, group, seat, language).model_dump()
    with force_locale(language):
        snapshot["gauge_svg"] = stock_gauge_svg(snapshot["view"], labels=gauge_labels(), id_prefix="stock")
        snapshot["debrief"] = phone_debrief(live, group)
    left = talk_remaining(live, group)
    snapshot["talk_remaining"] = None if left is None else round(left, 1)
    return snapshot


def add_to_console_snapshot(live, snapshot: dict[str, Any]) -> dict[str, Any]:
    """Per group: a small gauge as its seats see it, the talk countdown and the signal's parts."""
    state = live.state
    with force_locale(live.study.session.language):
        labels = gauge_labels()
        for g, group in enumerate(snapshot["groups"]):
            progress = state.groups[g]
            view = participant_view(live.study, progress.state, 0, progress.last_outcome, 0)
            group["gauge_svg"] = stock_gauge_svg(view, labels=labels, id_prefix=f"console-g{g + 1}")
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
        "pictures": _("Pictures"),
        "words": _("Words"),
        "picture_mode": _("Show pictures instead of words"),
        "take_n": _("Take %(n)s"),
        "take_none": _("Take nothing"),
        "others_none": _("The others' choices are not shown, only the group's total."),
        "debrief_title": _("The danger level, revealed"),
        "debrief_part": _("Part %(n)s: %(name)s"),
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


def language_choices(current: str, offered: tuple[str, ...]) -> list[dict[str, str]]:
    """The study's languages, each named in itself, for the phone's switcher."""
    return [
        {"code": code, "name": Locale.parse(code).get_display_name(code).capitalize(),
         "current": code == current}
        for code in offered
    ]
