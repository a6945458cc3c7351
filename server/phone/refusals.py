"""Refusals in the phone's language: a table from a refusal's stable code to its words.

The core's ``Refused`` messages are one English line for the facilitator and the logs;
a phone shows these instead, translated here on the server (``errors.py``: the codes are
the protocol). A code not in the table gets the general line, never the English one.
"""

from __future__ import annotations

from typing import Any

from flask_babel import force_locale
from flask_babel import gettext as _


def _phone_words() -> dict[str, str]:
    wait_next_part = _("This part of the game is over. Please wait for the next part.")
    paused = _("The game is paused. Please wait.")
    round_moved_on = _("That round is no longer open: your screen now shows the current one.")
    return {
        "invalid_harvest": _("That number is not allowed: choose a whole number from the ones offered."),
        "not_started": _("Please wait: the facilitator will start the game soon."),
        "session_over": _("The game is over. Thank you for playing."),
        "block_over": wait_next_part,
        "block_running": wait_next_part,
        "round_resolved": round_moved_on,
        "wrong_round": round_moved_on,
        "paused": paused,
        "group_paused": paused,
        "talking": _("Choices open when the countdown ends."),
        "not_your_seat": _("This phone decides only for its own seat."),
        "too_many": _("Too many messages at once. Wait a moment, then try again."),
    }


def phone_refusal(body: dict[str, Any], language: str) -> dict[str, Any]:
    """A refusal's event body with its ``message`` in ``language``; the code stays as it was."""
    with force_locale(language):
        words = _phone_words().get(body.get("code", ""))
        if words is None:
            words = _("This phone sent something the laptop could not use. Reload the page and try again.")
    return {**body, "message": words}
