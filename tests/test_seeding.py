"""Bulk draws over many groups give exactly numpy's own generators' numbers.

The reference is numpy itself: ``np.random.default_rng(key).random(n)`` (SeedSequence
feeding PCG64) and ``Generator.uniform``; the bulk functions must agree bit for bit,
because pilot group g must be what a live session gives group g.
"""

import numpy as np
import pytest
from studies import make_study

from ebbtide.game_logic.resource import draw_threshold, draw_thresholds
from ebbtide.game_logic.rounds import group_threshold, group_thresholds
from ebbtide.game_logic.seeding import bulk_round_draws, bulk_uniforms, round_rng


def test_bulk_uniforms_equal_numpy_generators_for_small_and_large_keys():
    rng = np.random.default_rng(2026)
    groups = np.concatenate([[0, 1, 2**32 - 1], rng.integers(0, 2**32, 200)])
    for seed in (0, 1, 987654321, 2**32, 2**70 + 5):  # 2**32 and beyond take two or three words
        for block, round_number in ((0, 1), (3, 20)):
            bulk = bulk_uniforms([seed, 2, groups, block, round_number], groups.size, 7)
            # Reference: numpy's SeedSequence + PCG64, one generator per key.
            ref = np.array([np.random.default_rng([seed, 2, int(g), block, round_number]).random(7)
                            for g in groups])
            assert np.array_equal(bulk, ref)


def test_bulk_round_draws_equal_round_rng():
    groups = np.arange(50)
    ref = np.array([round_rng(11, int(g), 1, 4).random(2) for g in groups])  # reference: numpy
    assert np.array_equal(bulk_round_draws(11, groups, 1, 4), ref)


def test_bulk_keys_outside_32_bits_are_refused():
    with pytest.raises(ValueError, match="2\\*\\*32"):
        bulk_uniforms([1, np.array([2**32])], 1, 1)


def test_thresholds_in_bulk_equal_generator_uniform():
    study = make_study(threshold='rule = "uniform"\nlow = 20.3\nhigh = 41.7\nrecovery_gap = 15')
    groups = np.arange(300)
    # Reference: numpy's Generator.uniform through the one-group rule.
    ref = np.array([group_threshold(study, 5, int(g), 0) for g in groups])
    assert np.array_equal(group_thresholds(study, 5, groups, 0), ref)
    fixed = make_study().threshold
    one = draw_threshold(fixed, np.random.default_rng(0))
    assert draw_thresholds(fixed, np.zeros(3)).tolist() == [one] * 3
