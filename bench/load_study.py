"""The study the load benchmark and its smoke test play: groups of five, one block, invented."""

from __future__ import annotations

SEATS = 5


def study_text(groups: int, rounds: int) -> str:
    """An invented bench lagoon: one block, groups of five, small harvests so the stock lasts."""
    return f"""
[session]
id = "bench-lagoon"
title = "Bench lagoon (invented, for load tests)"
place = "nowhere"
language = "en"
languages = ["en"]

[groups]
count = {groups}
seats_per_group = {SEATS}

[resource]
unit = "baskets"
capacity = 100
initial_stock = 90
max_harvest = 4

[resource.growth]
law = "logistic"
r = 0.5

[threshold]
rule = "fixed"
value = 20
recovery_gap = 10

[end]
rule = "fixed"

[[blocks]]
name = "only"
treatment = "none"
rounds = {rounds}

[payment]
points_per_unit = 1
currency = "marks"
exchange_rate = 1
show_up_fee = 10
"""
