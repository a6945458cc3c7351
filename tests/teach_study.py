"""The study the teaching tests share: one group per treatment, then a talk block (invented place)."""

from __future__ import annotations

from ebbtide.game_logic.study import parse_study

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
