"""The one information gate: each treatment shows what it should and hides the rest."""

import json

import pytest
from studies import make_study

from ebbtide.game_logic.rounds import resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.treatments import participant_view

SEED = 3
THRESHOLD = 'rule = "fixed"\nvalue = 33.7\nrecovery_gap = 15\nflip_probability = 0.35\nshown_range = [20, 50]'


def _view_after_one_round(treatment: str, show_others: bool = False):
    study = make_study(threshold=THRESHOLD, treatment=treatment, show_others=show_others)
    state = start_block(study, SEED, 0, 0)
    state, out = resolve(study, state, [4, 5, 6, 7], round_rng(SEED, 0, 0, 1))
    return participant_view(study, state, seat=1, last_outcome=out, points_total=5), out


@pytest.mark.parametrize("treatment", ["none", "vague", "range", "signal"])
def test_threshold_never_reaches_phones_that_may_not_see_it(treatment):
    view, out = _view_after_one_round(treatment)
    text = json.dumps(view)
    assert "33.7" not in text and "threshold" not in text
    assert str(out.flip_draw) not in text and "regime" not in text


@pytest.mark.parametrize("treatment, expected", [
    ("none", {"kind": "none"}),
    ("vague", {"kind": "vague"}),
    ("range", {"kind": "range", "low": 20, "high": 50}),
    ("exact", {"kind": "exact", "level": 33.7}),
    ("risk", {"kind": "risk", "level": 33.7, "flip_probability": 0.35}),
])
def test_each_treatment_says_what_it_promises(treatment, expected):
    view, _ = _view_after_one_round(treatment)
    assert view["danger"] == expected


def test_signal_shows_band_and_trend_only():
    view, _ = _view_after_one_round("signal")
    danger = view["danger"]
    assert set(danger) == {"kind", "band", "trend", "reasons"}
    # Words only: no number that could reveal the threshold.
    assert all(isinstance(v, str) for v in (danger["band"], danger["trend"], *danger["reasons"]))


def test_others_harvests_shown_only_with_show_others():
    hidden, _ = _view_after_one_round("none", show_others=False)
    shown, _ = _view_after_one_round("none", show_others=True)
    assert "others" not in hidden["last_round"]
    assert shown["last_round"]["others"] == [4, 6, 7]  # seat 2 (index 1) sees seats 1, 3, 4
    assert hidden["last_round"]["group_total"] == 22
    assert hidden["last_round"]["taken"] == 5
