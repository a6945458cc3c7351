"""The debrief of a live session: each group's finished blocks, revealed and replayed.

Built from the replayed state with ``game_logic.debrief.debrief_group`` for the console's
debrief pages and the handout (any time). Phones get their own group's part only after
the facilitator's ``debrief_revealed`` event, built in the core
(``debrief.participant_debrief``, inside ``phone_snapshot``); this module lends them only
its words (``plain_sentence``, ``chart_labels``).
"""

from __future__ import annotations

from typing import Any

from flask_babel import get_locale
from flask_babel import gettext as _

from ebbtide.game_logic.debrief import GroupDebrief, debrief_group
from ebbtide.game_logic.debrief import finished_outcomes as finished_in
from ebbtide.game_logic.rounds import Regime, RoundOutcome

from ..pictures.chart import WIDE, stock_path_svg


def finished_outcomes(live, group: int) -> list[RoundOutcome]:
    """The group's rounds in blocks it has finished (a block in play is not debriefed)."""
    progress = live.state.groups[group]
    return finished_in(progress.outcomes, progress.state)


def group_debrief(live, group: int) -> GroupDebrief | None:
    """The group's debrief over its finished blocks, or None before any block is over."""
    outcomes = finished_outcomes(live, group)
    if not outcomes:
        return None
    return debrief_group(live.study, live.state.seed, outcomes)


def degraded_rounds(live, group: int, block: int) -> list[int]:
    return [o.round for o in finished_outcomes(live, group)
            if o.block == block and o.regime_after is Regime.DEGRADED]


def chart_labels() -> dict[str, str]:
    """The debrief picture's words in the request's language."""
    return {
        "stock": _("Stock"),
        "round": _("Round"),
        "danger_level": _("Danger level {level}"),
        "recovery_level": _("Recovery {level}"),
        "crossed": _("Crossed in round {round}"),
        "degraded": _("Degraded"),
        "less": _("{k} less each"),
        "title": _("Stock path of part {block}"),
    }


def treatment_words(treatment: str) -> str:
    """What the group was told, in plain words (the handout is for the community)."""
    return {
        "none": _("told nothing about a danger level"),
        "vague": _("told that a danger level exists"),
        "range": _("told a range for the danger level"),
        "exact": _("told the danger level"),
        "risk": _("told the danger level and the chance of collapse"),
        "signal": _("shown a health reading of the stock"),
    }[treatment]


def _level(value: float) -> str:
    return f"{value:.1f}".removesuffix(".0")


def plain_sentence(block: dict[str, Any], unit: str) -> str:
    """One sentence a community can keep: what happened, and what taking less would have done."""
    if block["threshold"] is None:
        return _("This part had no danger level; the group took %(total)s %(unit)s in all.",
                 total=block["total_taken"], unit=unit)
    level = _level(block["threshold"])
    # Read from a console debrief block or a phone's DebriefFacts alike: "crossed" is a crossing round.
    saving = next((w for w in block["what_ifs"] if w.get("crossed_round") is None), None)
    if block.get("crossed_round") is None:
        return _("The stock stayed above the danger level of %(level)s in every round; "
                 "the group took %(total)s %(unit)s in all.",
                 level=level, total=block["total_taken"], unit=unit)
    if saving is not None:
        return _("The stock fell below the danger level of %(level)s in round %(round)s and lost "
                 "%(lost)s %(unit)s of regrowth after that; had everyone taken %(k)s less each round, "
                 "it would have stayed above.",
                 level=level, round=block["crossed_round"], lost=block["total_regrowth_lost"],
                 unit=unit, k=saving["less_by"])
    deepest = block["what_ifs"][-1] if block["what_ifs"] else None
    if deepest is None:
        return _("The stock fell below the danger level of %(level)s in round %(round)s and lost "
                 "%(lost)s %(unit)s of regrowth after that.",
                 level=level, round=block["crossed_round"], lost=block["total_regrowth_lost"], unit=unit)
    return _("The stock fell below the danger level of %(level)s in round %(round)s and lost "
             "%(lost)s %(unit)s of regrowth after that; even with everyone taking %(k)s less each "
             "round, it would have crossed in round %(later)s.",
             level=level, round=block["crossed_round"], lost=block["total_regrowth_lost"], unit=unit,
             k=deepest["less_by"], later=deepest["crossed_round"])


def debrief_blocks(live, group: int, id_prefix: str) -> list[dict[str, Any]]:
    """Every finished block of the group, ready for a page: numbers, sentence and picture.

    The projector and the handout are read by participants too: each block carries its
    participant-facing ``label`` in the page's language (None: the page says "Part n"),
    never the researcher's block name.
    """
    debrief = group_debrief(live, group)
    if debrief is None:
        return []
    labels = chart_labels()
    language = str(get_locale() or live.study.session.language)
    blocks = []
    for raw in debrief.to_dict()["blocks"]:
        raw["part"] = raw["block"] + 1
        raw["label"] = live.study.block_label(raw["block"], language)
        raw["told"] = treatment_words(raw["treatment"])
        raw["sentence"] = plain_sentence(raw, live.study.resource.unit)
        raw["svg"] = stock_path_svg(
            raw, live.study.resource.capacity, degraded_rounds(live, group, raw["block"]),
            labels=labels, id_prefix=f"{id_prefix}-b{raw['part']}", layout=WIDE,
        )
        blocks.append(raw)
    return blocks
