"""The one information gate: each treatment shows what it should and hides the rest."""

import json

import numpy as np
import pytest
from studies import TREATMENTS, make_study

from ebbtide.game_logic.rounds import GroupState, Regime, group_thresholds, resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.treatments import danger_columns, danger_info, participant_view

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


def test_danger_columns_say_what_danger_info_says_to_each_group():
    # Reference: danger_info, the phone's own rule, called group by group (the pilot's
    # column form must give every group the same kind, numbers and band).
    study = make_study(threshold='rule = "uniform"\nlow = 20.05\nhigh = 40.15\nrecovery_gap = 15\n'
                                 'flip_probability = 0.35\nshown_range = [20, 50]', treatment="none")
    block = study.blocks[0].model_copy(update={"treatment": None, "treatments": TREATMENTS})
    study = study.model_copy(update={"blocks": (block,)})
    groups = np.arange(40) * 7 + 2
    thresholds = group_thresholds(study, SEED, groups, 0)
    stocks = np.arange(40) * 3  # the signal's band depends on the stock
    columns = danger_columns(study, 0, groups, thresholds, stocks)
    infos = [danger_info(study, GroupState(group=int(g), block=0, round=0, stock=int(s), regime=Regime.GOOD,
                                           threshold=float(t), stock_path=(int(s),)))
             for g, t, s in zip(groups, thresholds, stocks, strict=True)]
    assert columns["kind"].tolist() == [i["kind"] for i in infos]
    for key in ("level", "low", "high", "flip_probability"):
        expected = [float(i.get(key, np.nan)) for i in infos]
        assert np.array_equal(columns[key], expected, equal_nan=True), key
    assert columns["band"].tolist() == [i.get("band", "") for i in infos]
    assert set(columns["kind"].tolist()) == set(TREATMENTS)
