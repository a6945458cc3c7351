"""Talk pauses on the shell's clock: start on first sight, extend, end, refuse when over."""

from __future__ import annotations

import pytest

from ebbtide.game_logic.errors import Refused
from ebbtide.server.console.talk import RoundKey, TalkPauses

KEY = RoundKey("s", 0, 2, 1)


def test_pause_starts_on_first_ask_and_counts_down():
    pauses = TalkPauses()
    assert pauses.remaining(KEY, 60, now=100.0) == 60
    assert pauses.remaining(KEY, 60, now=130.0) == 30
    assert pauses.remaining(KEY, 60, now=170.0) == 0


def test_pause_is_per_round():
    pauses = TalkPauses()
    pauses.remaining(KEY, 60, now=0.0)
    assert pauses.remaining(RoundKey("s", 0, 2, 2), 60, now=50.0) == 60


def test_extend_adds_to_a_running_pause():
    pauses = TalkPauses()
    pauses.remaining(KEY, 60, now=0.0)
    assert pauses.extend(KEY, 30, now=20.0) == 70
    assert pauses.remaining(KEY, 60, now=20.0) == 70


def test_extend_after_the_pause_is_over_is_refused_and_changes_nothing():
    pauses = TalkPauses()
    pauses.remaining(KEY, 60, now=0.0)
    with pytest.raises(Refused, match="only a running pause can be extended"):
        pauses.extend(KEY, 30, now=61.0)
    assert pauses.remaining(KEY, 60, now=61.0) == 0


def test_end_opens_choices_at_once():
    pauses = TalkPauses()
    pauses.remaining(KEY, 60, now=0.0)
    pauses.end(KEY, now=5.0)
    assert pauses.remaining(KEY, 60, now=5.0) == 0
    with pytest.raises(Refused, match="not running"):
        pauses.end(KEY, now=6.0)
