"""rounds.csv: ``crossed`` (the regime flipped) against ``below_threshold`` (stock under the level)."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import study_with

from ebbtide.exports.schema import CONTRACT
from ebbtide.exports.tables import round_row
from ebbtide.game_logic.rounds import resolve, start_block

# A fixed danger level of 40 and a start of 50: two seats taking 15 each leave 50 - 30 = 20,
# below 40 (hand arithmetic). Invented numbers.
FIXED_40 = {"rule = \"uniform\"\nlow = 25\nhigh = 45": "rule = \"fixed\"\nvalue = 40\nshown_range = [30, 50]",
            "initial_stock = 80": "initial_stock = 50"}


class Draws:
    """A generator stand-in that returns chosen uniforms (flip draw, continuation draw)."""

    def __init__(self, *values):
        self.values = np.array(values, dtype=float)

    def random(self, n):
        return self.values[:n]


@pytest.mark.parametrize(("flip_probability", "crossed"), [("1.0", True), ("0.0", False)])
def test_a_stock_below_the_danger_level_is_below_threshold_whether_or_not_it_flipped(
        flip_probability, crossed):
    study = study_with(**FIXED_40, **{"flip_probability = 1.0": f"flip_probability = {flip_probability}"})
    state, outcome = resolve(study, start_block(study, 1, 0, 0), [15, 15], Draws(0.5, 0.5))
    row = round_row(study, "s", outcome)
    assert row["remaining"] == 20
    assert row["crossed"] is crossed  # the regime flips only with the stated chance
    assert row["below_threshold"] is True  # 20 < 40 either way


def test_an_already_degraded_stock_below_the_level_is_below_but_does_not_cross_again():
    study = study_with(**FIXED_40)
    state, first = resolve(study, start_block(study, 1, 0, 0), [15, 15], Draws(0.5, 0.5))
    assert first.crossed
    _, second = resolve(study, state, [0, 0], Draws(0.5, 0.5))
    row = round_row(study, "s", second)
    assert second.remaining < 40 and row["crossed"] is False and row["below_threshold"] is True


def test_exactly_at_the_level_is_not_below_and_no_threshold_is_never_below():
    # 50 - 10 = 40: "below" is strict, as the regime rule is (docs/model.md).
    study = study_with(**FIXED_40)
    _, at_level = resolve(study, start_block(study, 1, 0, 0), [5, 5], Draws(0.5, 0.5))
    assert at_level.remaining == 40 and round_row(study, "s", at_level)["below_threshold"] is False
    none = study_with(**{"rule = \"uniform\"\nlow = 25\nhigh = 45": "rule = \"none\"",
                         "treatment = \"range\"": "treatment = \"none\""})
    _, outcome = resolve(none, start_block(none, 1, 0, 0), [15, 15], Draws(0.5, 0.5))
    assert round_row(none, "s", outcome)["below_threshold"] is False


def test_the_codebook_documents_both_flags():
    fields = {c.name: c.description for c in CONTRACT["rounds"]}
    assert "flipped" in fields["crossed"]
    assert "whether or not the regime flipped" in fields["below_threshold"]
