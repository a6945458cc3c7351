"""Simple, documented simulated players for the pilot and the rehearsal bots.

Each strategy asks, for many groups at once, how many units every seat wants:
``ask(round_number, stock, last_taken, rng) -> (groups, seats)`` whole units.
Simulated players see only what a participant of a ``none`` block would see
(the stock and last round's harvests), never the threshold.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .benchmarks import equal_share_of_sustainable_yield
from .study import Study


@dataclass(frozen=True)
class TakeMaximum:
    """Everyone takes the per-seat maximum every round (the selfish benchmark)."""

    name = "max"
    cap: int
    seats: int

    def ask(self, round_number, stock, last_taken, rng) -> NDArray[np.int64]:
        return np.full((stock.shape[0], self.seats), self.cap, dtype=np.int64)


@dataclass(frozen=True)
class EqualShareOfSustainableYield:
    """Everyone takes floor(MSY / seats): together never more than the MSY."""

    name = "sustainable"
    share: int
    seats: int

    def ask(self, round_number, stock, last_taken, rng) -> NDArray[np.int64]:
        return np.full((stock.shape[0], self.seats), self.share, dtype=np.int64)


@dataclass(frozen=True)
class NoisyConditionalCooperator:
    """Starts at the equal share of the sustainable yield, then matches the others.

    From round 2 each seat asks the mean of what the other seats took last
    round, plus normal noise (sd ``noise`` units), rounded and clipped to
    0..max. A common description of conditional cooperation in public-good and
    common-pool experiments (common practice, no source for these numbers).
    """

    name = "conditional"
    share: int
    seats: int
    cap: int
    noise: float = 1.0

    def ask(self, round_number, stock, last_taken, rng) -> NDArray[np.int64]:
        groups = stock.shape[0]
        if last_taken is None:
            base = np.full((groups, self.seats), float(self.share))
        else:
            totals = last_taken.sum(axis=1, keepdims=True)
            base = (totals - last_taken) / (self.seats - 1)
        wish = base + rng.normal(0.0, self.noise, size=(groups, self.seats))
        return np.clip(np.floor(wish + 0.5), 0, self.cap).astype(np.int64)


STRATEGY_NAMES = ("max", "sustainable", "conditional")


def make_strategy(name: str, study: Study):
    """Build a named strategy for a study; ``ValueError`` names the allowed ones."""
    cap, seats = study.resource.max_harvest, study.seats
    if name == "max":
        return TakeMaximum(cap=cap, seats=seats)
    share = min(cap, equal_share_of_sustainable_yield(study))
    if name == "sustainable":
        return EqualShareOfSustainableYield(share=share, seats=seats)
    if name == "conditional":
        return NoisyConditionalCooperator(share=share, seats=seats, cap=cap)
    raise ValueError(f"unknown strategy {name!r}; allowed: {', '.join(STRATEGY_NAMES)}")


def choose_from_view(name: str, view: dict, share: int, rng: np.random.Generator) -> int:
    """One simulated seat's harvest from what its phone shows (rehearsal bots).

    Same rules as the vectorised strategies, read from a participant view: the
    conditional cooperator matches the others' mean of last round, which every
    treatment shows as the group total less the seat's own take.
    """
    cap = int(view["max_harvest"])
    if name == "max":
        return cap
    if name == "sustainable":
        return min(cap, share)
    if name != "conditional":
        raise ValueError(f"unknown strategy {name!r}; allowed: {', '.join(STRATEGY_NAMES)}")
    last = view.get("last_round")
    if last is None:
        base = float(share)
    else:
        base = (last["group_total"] - last["taken"]) / max(1, view["seats"] - 1)
    wish = base + rng.normal(0.0, 1.0)
    return int(np.clip(np.floor(wish + 0.5), 0, cap))
