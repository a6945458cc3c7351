"""Small study designs built in code for the core tests (invented numbers)."""

from __future__ import annotations

from ebbtide.game_logic.study import parse_study

BASE = """
[session]
id = "test-study"
title = "Test lagoon"

[groups]
count = {groups}
seats_per_group = {seats}

[resource]
capacity = 100
initial_stock = {initial}
max_harvest = {max_harvest}

[resource.growth]
law = "logistic"
r = 0.5

[threshold]
{threshold}

[end]
{end}

[[blocks]]
name = "only"
treatment = "{treatment}"
rounds = {rounds}
show_others = {show_others}
"""


def make_study(
    *,
    groups: int = 2,
    seats: int = 4,
    initial: int = 80,
    max_harvest: int = 10,
    threshold: str = 'rule = "fixed"\nvalue = 30\nrecovery_gap = 15',
    end: str = 'rule = "fixed"',
    treatment: str = "none",
    rounds: int = 10,
    show_others: bool = False,
):
    text = BASE.format(
        groups=groups, seats=seats, initial=initial, max_harvest=max_harvest,
        threshold=threshold, end=end, treatment=treatment, rounds=rounds,
        show_others=str(show_others).lower(),
    )
    return parse_study(text)
