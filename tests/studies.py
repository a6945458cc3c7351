"""Every study the tests build in code, in one place (invented places and numbers).

``make_study`` is the general builder for the core tests; ``teach_study`` is the six-treatment
study the teaching and leak tests share; ``debrief_study`` and ``dp_study`` are the small designs
of the debrief and dynamic-programme checks. The demo file itself is ``conftest.DEMO``.
"""

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


# -- the teaching study ------------------------------------------------------

# A distinctive hidden threshold: any leak of it (or of its recovery level) is easy to find.
THRESHOLD = 37.913
RECOVERY = THRESHOLD + 15
TREATMENTS = ("none", "vague", "range", "exact", "risk", "signal")

TEXT = """
[session]
id = "fennick-teach"
title = "Fennick cockle flats (test)"
place = "Fennick (invented)"
language = "en"
languages = ["en", "es", "fr"]
teaching_view = {teaching_view}

[session.label]
en = "The cockle flats"
es = "Las marismas de berberechos"
fr = "Les vasières à coques"

[groups]
count = 6
seats_per_group = 2

[resource]
unit = "baskets"
unit_label = {{ en = "baskets", es = "cestas", fr = "paniers" }}
capacity = 100
initial_stock = 50
max_harvest = 8

[threshold]
rule = "fixed"
value = 37.913
recovery_gap = 15
flip_probability = 0.75
shown_range = [25, 50]

[[blocks]]
name = "told"
label = {{ en = "First tides", es = "Primeras mareas", fr = "Premières marées" }}
treatments = ["none", "vague", "range", "exact", "risk", "signal"]
rounds = 2

[[blocks]]
name = "talk-and-see"
treatment = "range"
rounds = 2
talk = true
talk_seconds = {talk_seconds}
show_others = true
"""


def teach_study(teaching_view: bool = True, talk_seconds: int = 60):
    return parse_study(TEXT.format(teaching_view=str(teaching_view).lower(), talk_seconds=talk_seconds))


# -- the debrief checks' study: one group, a threshold that flips with a stated chance --
DEBRIEF_TOML = """
[session]
id = "ulmsby-test"
title = "Ulmsby reed beds (test)"

[groups]
count = 2
seats_per_group = 2

[resource]
capacity = 100
initial_stock = 80
max_harvest = 15
degraded_growth_factor = 0.2

[resource.growth]
law = "logistic"
r = 0.5

[threshold]
rule = "fixed"
value = 40
recovery_gap = 15
flip_probability = {flip}

[[blocks]]
name = "season-one"
treatment = "{treatment}"
rounds = {rounds}

[[blocks]]
name = "season-two"
treatment = "none"
rounds = 4
"""
DEBRIEF_SEED = 20240611


def debrief_study(flip=1.0, treatment="exact", rounds=8):
    return parse_study(DEBRIEF_TOML.format(flip=flip, treatment=treatment, rounds=rounds))


# -- the dynamic-programme checks' study --------------------------------------------
DP_TOML = """
[session]
id = "dp-case"
title = "Dynamic programming check (invented)"
[groups]
count = 1
seats_per_group = {seats}
[resource]
capacity = {capacity}
initial_stock = {start}
max_harvest = {cap}
degraded_growth_factor = {factor}
[resource.growth]
{growth}
[threshold]
{threshold}
[[blocks]]
name = "season"
rounds = {rounds}
"""


def dp_study(seats=4, capacity=100, start=80, cap=10, threshold='rule = "none"', rounds=10,
             growth='law = "logistic"\nr = 0.5', factor=0.2):
    return parse_study(DP_TOML.format(
        seats=seats, capacity=capacity, start=start, cap=cap, threshold=threshold, rounds=rounds,
        growth=growth, factor=factor,
    ))
