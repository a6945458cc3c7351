"""A one-screen summary of a study design, and warnings about its dynamics.

Used by ``ebbtide check`` before the trip and by the console's setup screen.
"""

from __future__ import annotations

import math

from .benchmarks import equilibria, maximum_sustainable_yield
from .field_day_spec import day_plan
from .money import earnings, money_text
from .study import Study, participant_text_warnings


def design_warnings(study: Study) -> list[str]:
    """Parameter choices that make the game misbehave or lose its point."""
    res, growth, thr = study.resource, study.resource.growth, study.threshold
    warnings = []
    if growth.law in ("logistic", "step") and growth.r > 2:
        warnings.append(
            f"resource.growth.r = {growth.r:g} > 2: the discrete logistic map does not settle "
            "but oscillates or turns chaotic (May 1976, Nature 261:459); choose r <= 2"
        )
    elif growth.law in ("logistic", "step") and growth.r > 1:
        warnings.append(
            f"resource.growth.r = {growth.r:g} > 1: the stock overshoots and oscillates on its "
            "way to capacity, which participants may read as noise"
        )
    msy = maximum_sustainable_yield(growth, res.capacity)
    group_max = study.seats * res.max_harvest
    if group_max <= msy.harvest:
        warnings.append(
            f"everyone taking the maximum ({group_max} per round) is within the sustainable "
            f"yield ({msy.harvest:.1f}): there is no dilemma; raise resource.max_harvest"
        )
    stable = [x for x, is_stable in equilibria(growth, res.capacity) if is_stable and x > 0]
    if stable and max(stable) < 0.9 * res.capacity:
        warnings.append(
            f"without any harvest the stock settles near {max(stable):.1f}, not at capacity "
            f"{res.capacity}: check the growth parameters"
        )
    if growth.law == "allee" and res.initial_stock <= growth.allee_point:
        warnings.append("resource.initial_stock is at or below the Allee point: the stock collapses unaided")
    support = thr.support
    if support is not None and support[1] >= res.initial_stock:
        warnings.append(
            f"the threshold can be as high as {support[1]:g}, at or above the initial stock "
            f"{res.initial_stock}: some groups would start in the danger zone"
        )
    if study.session.teaching_view:
        warnings.append(
            "session.teaching_view = true: the projector shows every group's stock during play, "
            "which changes the treatment; use it for workshops, not for research sessions"
        )
    minutes = expected_minutes(study)
    if minutes > 180:
        warnings.append(f"expected duration {minutes:.0f} minutes: over three hours is hard on participants")
    return warnings + participant_text_warnings(study)


def expected_minutes(study: Study) -> float:
    """Setup, every round at its stated pace, talk pauses, the debrief, and the field day's
    consent, instructions, practice and questionnaires (``field_day_spec.day_plan``)."""
    return sum(minutes for _, minutes in day_plan(study))


def design_summary(study: Study) -> list[str]:
    """Lines of the one-screen summary printed by ``ebbtide check``."""
    res, pay = study.resource, study.payment
    msy = maximum_sustainable_yield(res.growth, res.capacity)
    people = study.groups.count * study.seats
    lines = [
        f"{study.session.title}  [{study.session.id}]",
        f"place: {study.session.place or '-'}; languages: {', '.join(study.session.languages)}",
        f"groups: {study.groups.count} x {study.seats} seats = {people} participants",
        f"stock: {res.initial_stock} of capacity {res.capacity} {res.unit}; "
        f"each seat takes 0..{res.max_harvest} a round; growth: {res.growth.law} (r = {res.growth.r:g})",
    ]
    support = study.threshold.support
    if support is None:
        lines.append("threshold: none")
    else:
        lines.append(
            f"threshold: {study.threshold.rule} {support[0]:g}..{support[1]:g}, recovery above "
            f"threshold + {study.threshold.recovery_gap:g}, flip chance {study.threshold.flip_probability:g}"
        )
    end = study.end
    stop = (
        "fixed length" if end.rule == "fixed"
        else f"random stop, continue with p = {end.continuation_probability:g} after round {end.min_rounds}"
    )
    lines.append(f"rounds: {study.total_rounds} in {len(study.blocks)} block(s), {stop}")
    for i, b in enumerate(study.blocks, start=1):
        switches = [name for name, on in (("talk", b.talk), ("show_others", b.show_others)) if on]
        lines.append(
            f"  block {i} {b.name}: {b.rounds} rounds, treatment {'/'.join(b.all_treatments)}"
            + (f" + {', '.join(switches)}" if switches else "")
        )
    lines.append(f"expected duration: {expected_minutes(study):.0f} minutes")
    lines.append(
        f"sustainable yield: {msy.harvest:.2f} {res.unit} a round at a stock of {msy.stock:.1f} "
        f"(equal share {math.floor(msy.harvest / study.seats)} per seat)"
    )
    drain = res.initial_stock
    lines.append(
        f"one-round drain: a group harvest of {drain} empties the initial stock "
        f"({math.ceil(drain / study.seats)} per seat; the maximum is {res.max_harvest})"
    )
    most_units = study.total_rounds * res.max_harvest
    lines.append(
        f"payment: {money_text(earnings(0, pay).cash)} to {money_text(earnings(most_units, pay).cash)} "
        f"{pay.currency} per person "
        f"(show-up fee {money_text(pay.show_up_fee)}, rounded up to {money_text(pay.round_up_to)})"
    )
    return lines
