"""Proportional rationing: conserves units, never gives more than asked, deterministic."""

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from ebbtide.game_logic.resource import ration


def test_rationing_leaves_requests_alone_when_stock_suffices():
    assert ration([3, 4, 5], 20).tolist() == [3, 4, 5]


def test_rationing_shares_by_largest_remainder():
    # 10 units, asks 5, 3, 2 (total 10) -> exact; 7 units: quotas 3.5, 2.1, 1.4
    # floors 3, 2, 1 (6), one left for the largest remainder (seat 1: .5).
    assert ration([5, 3, 2], 7).tolist() == [4, 2, 1]


def test_rationing_breaks_ties_towards_lower_seat():
    # 5 units, four seats asking 10 each: quotas 1.25 each, floors 1, one unit left,
    # equal remainders -> seat 1.
    assert ration([10, 10, 10, 10], 5).tolist() == [2, 1, 1, 1]


def test_rationing_many_groups_at_once_matches_one_by_one():
    asked = np.array([[5, 3, 2], [10, 10, 10], [1, 0, 0]])
    stock = np.array([7, 4, 0])
    together = ration(asked, stock)
    alone = np.array([ration(a, s) for a, s in zip(asked, stock, strict=True)])
    assert (together == alone).all()


@given(
    asked=st.lists(st.integers(0, 100), min_size=1, max_size=12),
    stock=st.integers(0, 1000),
)
def test_rationing_conserves_units_and_respects_asks(asked, stock):
    taken = ration(asked, stock)
    assert (taken >= 0).all()
    assert (taken <= np.array(asked)).all()
    assert taken.sum() == min(stock, sum(asked))


@given(
    asked=st.lists(st.integers(0, 50), min_size=2, max_size=8),
    stock=st.integers(0, 200),
)
def test_rationing_never_gives_a_smaller_ask_more(asked, stock):
    # Monotone: a seat that asked less never receives more than one that asked more
    # (property of the largest-remainder rule, common practice, no source).
    taken = ration(asked, stock)
    for i in range(len(asked)):
        for j in range(len(asked)):
            if asked[i] < asked[j]:
                assert taken[i] <= taken[j]
