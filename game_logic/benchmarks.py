"""Reference points for a design: sustainable yield, open access, equilibria.

Pure functions of the study's parameters. The analysis compares what groups
did against these numbers.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import brentq, minimize_scalar

from .resource import growth, next_regime, regrow
from .rounds import advance
from .study import GrowthSpec, Study


@dataclass(frozen=True)
class SustainableYield:
    """Largest regrowth the good regime can give every round, and where."""

    stock: float
    harvest: float


def maximum_sustainable_yield(spec: GrowthSpec, capacity: float) -> SustainableYield:
    """Maximise the regrowth g(x) over 0 <= x <= K (bounded scalar search).

    For the logistic law the answer is r K / 4 at K / 2 (Schaefer 1954).
    """
    # A coarse grid first: the grazing and step laws have more than one hump.
    grid = np.linspace(0.0, capacity, 2001)
    best = float(grid[int(np.argmax(growth(grid, spec, capacity)))])
    width = capacity / 2000
    lo, hi = max(0.0, best - width), min(float(capacity), best + width)
    found = minimize_scalar(
        lambda x: -float(growth(x, spec, capacity)), bounds=(lo, hi), method="bounded",
        options={"xatol": 1e-9},
    )
    x = float(found.x)
    return SustainableYield(stock=x, harvest=float(growth(x, spec, capacity)))


def equal_share_of_sustainable_yield(study: Study) -> int:
    """Whole units per seat per round that keep the group at or under the MSY."""
    msy = maximum_sustainable_yield(study.resource.growth, study.resource.capacity)
    return int(np.floor(msy.harvest / study.seats))


def one_round_drain(study: Study) -> int:
    """Group harvest that empties the initial stock in a single round."""
    return study.resource.initial_stock


def equilibria(spec: GrowthSpec, capacity: float, points: int = 4001) -> list[tuple[float, bool]]:
    """Stock levels where regrowth is zero, with their stability.

    Stable means a small perturbation shrinks under the continuous flow
    dx/dt = g(x), i.e. g'(x) < 0. Roots are bracketed on a grid and polished
    with Brent's method; x = 0 is always an equilibrium.
    """
    def g(x: float) -> float:
        return float(growth(x, spec, capacity))

    xs = np.linspace(0.0, capacity * 1.0000001, points)
    values = growth(xs, spec, capacity)
    roots = [0.0]
    for a, b, ga, gb in zip(xs[:-1], xs[1:], values[:-1], values[1:], strict=True):
        if a == 0.0:
            continue
        if ga == 0.0:
            roots.append(float(a))
        elif ga * gb < 0:
            roots.append(float(brentq(g, a, b, xtol=1e-12)))
    result = []
    h = capacity * 1e-6
    for x in roots:
        slope = (g(x + h) - g(max(x - h, 0.0))) / (x + h - max(x - h, 0.0))
        result.append((x, slope < 0))
    return result


@dataclass(frozen=True)
class OpenAccess:
    """Bioeconomic equilibrium of an unregulated fishery (Gordon 1954)."""

    stock: float
    effort: float
    harvest: float


def gordon_schaefer_open_access(
    r: float, capacity: float, catchability: float, price: float, cost_per_effort: float
) -> OpenAccess:
    """Open-access equilibrium of the Gordon–Schaefer model.

    Harvest is q E x; entry stops when rent p q E x - c E is zero, so the stock
    settles at x = c / (p q), and effort at E = r (1 - x/K) / q where the
    logistic regrowth balances the harvest.
    """
    stock = cost_per_effort / (price * catchability)
    effort = max(0.0, r * (1.0 - stock / capacity) / catchability)
    return OpenAccess(stock=stock, effort=effort, harvest=catchability * effort * stock)


# --- Group benchmarks over a whole block: social optimum and selfish play -------------


@dataclass(frozen=True)
class ThresholdBelief:
    """What a planner knows about the threshold: representative values and their weights.

    ``values`` holds NaN alone when the design has no threshold. Weights sum to one.
    """

    values: tuple[float, ...]
    weights: tuple[float, ...]


def threshold_belief(study: Study) -> ThresholdBelief:
    """The study's threshold distribution, reduced to classes that act alike.

    The model compares whole-unit remainders R with T (``R < T`` flips) and with
    T + gap (``R > T + gap`` recovers), so the dynamics change only where T or
    T + gap crosses a whole number. A uniform T therefore falls into finitely
    many classes; each class is represented by its midpoint and weighted by its
    length. The expectation over the uniform threshold is then exact, not a
    quadrature approximation.
    """
    spec = study.threshold
    if spec.rule == "none":
        return ThresholdBelief((float("nan"),), (1.0,))
    if spec.rule == "fixed":
        return ThresholdBelief((float(spec.value),), (1.0,))
    low, high, gap = float(spec.low), float(spec.high), float(spec.recovery_gap)
    whole = np.arange(np.floor(low), np.ceil(high + gap) + 1)
    cuts = np.concatenate([whole, whole - gap])
    edges = np.unique(np.concatenate([[low, high], cuts[(cuts > low) & (cuts < high)]]))
    lengths = np.diff(edges)
    return ThresholdBelief(
        tuple(float(v) for v in (edges[:-1] + edges[1:]) / 2),
        tuple(float(w) for w in lengths / (high - low)),
    )


@dataclass(frozen=True)
class HarvestPolicy:
    """A group harvest policy from dynamic programming, and its expected value.

    ``harvest[t, d, s]`` is the group harvest (whole units) in round ``t + 1`` of
    the block at stock ``s`` in regime ``d`` (0 good, 1 degraded); ``value[d, s]``
    is the expected (discounted) total the group takes over the block when it
    starts there and follows the policy.
    """

    harvest: NDArray[np.int64]
    value: NDArray[np.float64]
    belief: ThresholdBelief
    discount: float

    @property
    def rounds(self) -> int:
        return int(self.harvest.shape[0])

    def value_at(self, stock: int, degraded: bool = False) -> float:
        return float(self.value[int(degraded), int(stock)])

    def harvest_at(self, round_number: int, stock: int, degraded: bool = False) -> int:
        """Group harvest in 1-based ``round_number`` of the block."""
        return int(self.harvest[round_number - 1, int(degraded), int(stock)])


def optimal_group_policy(
    study: Study,
    rounds: int,
    discount: float = 1.0,
    continuation: Sequence[float] | None = None,
    belief: ThresholdBelief | None = None,
) -> HarvestPolicy:
    """The group's social optimum by backward induction over (stock, regime).

    Value is the total number of units the group takes (linear payoff), each
    later round weighted by ``discount`` per round. State: whole-unit stock
    0..K and regime; action: a group harvest 0..seats * max_harvest (how it is
    split among seats does not matter to the group). Transitions are the
    model's own: ``resource.next_regime`` (flip with the study's probability,
    recovery above T + gap) and ``resource.regrow``; rationing never binds
    because the planner never asks for more than the stock.

    Approximation (stated, not hidden): when the threshold is uncertain the
    planner knows only its distribution and does not learn from the path. One
    policy is chosen for all threshold classes, each round maximising the
    prior-weighted expected value of continuing with that same policy. With a
    fixed threshold, or none, the policy is the exact optimum.

    Parameters
    ----------
    rounds : block length in rounds (the planner knows it).
    discount : per-round weight of the future, 0 < discount <= 1.
    continuation : optional probability, for each round t = 1..rounds - 1, that
        round t + 1 is played once round t was (random stopping).
    belief : threshold classes and weights; default ``threshold_belief(study)``.
    """
    if rounds < 1:
        raise ValueError(f"rounds must be at least 1, got {rounds}")
    if not 0 < discount <= 1:
        raise ValueError(f"discount must lie in (0, 1], got {discount}")
    survive = np.ones(rounds) if continuation is None else np.append(np.asarray(continuation, float), 1.0)
    if survive.size != rounds or np.any((survive < 0) | (survive > 1)):
        raise ValueError(f"continuation needs {rounds - 1} probabilities in [0, 1]")
    res, thr = study.resource, study.threshold
    belief = threshold_belief(study) if belief is None else belief
    capacity = res.capacity
    # A harvest beyond the stock is barred, so no group harvest above K is ever a candidate.
    cap = min(study.seats * res.max_harvest, capacity)
    levels = np.arange(capacity + 1)
    n = levels.size
    weights = np.asarray(belief.weights, float)
    classes = weights.size
    regimes = np.arange(2)[:, None]
    # Tables are laid out (regime, stock, class): the gathers that follow the policy move whole
    # rows of classes, and the expectation over the belief is one matrix-vector product.
    thresholds = np.asarray(belief.values, float)[None, None, :]
    was_degraded = np.array([False, True])[:, None, None]
    # Regrowth depends only on the remainder and the regime after it: one row per regime.
    regrown = regrow(np.broadcast_to(levels, (2, n)), np.array([[False], [True]]), res.growth,
                     capacity, res.degraded_growth_factor)
    # Two outcomes of the flip draw: 0.0 flips whenever the rule allows, 1.0 never does; the
    # regime each leads to, per (regime, remainder R, class).
    draws = ((0.0, thr.flip_probability), (1.0, 1.0 - thr.flip_probability))
    afters = [
        np.broadcast_to(next_regime(was_degraded, levels[None, :, None], thresholds, thr.recovery_gap,
                                    thr.flip_probability, draw)[0], (2, n, classes)).ravel()
        for draw, p in draws if p > 0
    ]
    chances = [p for _, p in draws if p > 0]
    # ``reached`` is laid out (regime after, R, class): the state after a draw is the same place
    # in the table of the regime the draw leads to. Under the last draw most places keep their
    # regime; ``moves`` marks, per regime, where that draw leads to the other one.
    plane = n * classes
    moved = afters[-1].reshape(2, n, classes) != np.array([False, True])[:, None, None]
    moves = [(d, there) for d, there in enumerate(moved) if there.any()]
    # Where every draw leads to the same state (a degraded stock that does not recover, a good
    # one left at or above T, a certain or impossible flip) the expectation over the draw is that
    # state's value; only where the draw matters are both outcomes gathered and weighted.
    matters = np.flatnonzero(afters[0] != afters[-1])
    branches = [(after[matters] * plane + matters % plane, p)
                for after, p in zip(afters, chances, strict=True)]
    mixed, branch = np.empty((2, matters.size))
    future, reached = np.empty((2, 2, n, classes))
    policy = np.zeros((rounds, 2, n), dtype=np.int64)
    # Score of harvest h at stock s is expected[s - h] + h - 1e-9 h, i.e. key[R] + (1 - 1e-9) s
    # with R = s - h: the best harvest is the best remainder in the window s - cap <= R <= s.
    # The hair's penalty per unit makes ties (common with integer stocks) go to the smaller
    # harvest, i.e. the larger remainder. key is padded with cap barred (-inf) places on the left.
    slope = levels * (1.0 - 1e-9)
    padded = np.full((2, cap + n), -np.inf)
    take = np.zeros((2, n), dtype=np.int64)
    for t in range(rounds - 1, -1, -1):
        weight = discount * survive[t] if t < rounds - 1 else 0.0
        if weight:
            # Value of the next round's policy at every regrown stock: what it takes there plus
            # what its own successor was worth (future of the round after, at the stock kept).
            # mode='clip' only spares numpy a buffered copy: every index is in range.
            taken_there = take[regimes, regrown]  # whole units; added as floats below (cheaper)
            np.take(future.reshape(2 * n, classes), (regimes * n + regrown - taken_there).ravel(), axis=0,
                    out=reached.reshape(2 * n, classes), mode="clip")
            reached += taken_there[:, :, None].astype(float)
            # future = weight * E[value of the next state] over the flip draw, built in place:
            # the mixture where the draw matters (read first), then the value in the other
            # regime where the last draw moves there.
            if matters.size:
                for i, (at, p) in enumerate(branches):
                    np.take(reached, at, out=branch if i else mixed, mode="clip")
                    if i:
                        branch *= p
                        mixed += branch
                    else:
                        mixed *= p
            source = reached if len(moves) < 2 else reached.copy()
            for d, moved_there in moves:
                np.copyto(reached[d], source[1 - d], where=moved_there)
            if matters.size:
                reached.reshape(-1)[matters] = mixed
            future, reached = reached, future
            if weight != 1.0:
                future *= weight
        else:
            # Nothing counts after the last round (or a sure stop).
            future.fill(0.0)
        expected = (future.reshape(2 * n, classes) @ weights).reshape(2, n)  # over the planner's belief
        np.subtract(expected, slope, out=padded[:, cap:])
        _, where = _window_argmax(padded, cap + 1)
        take = levels - (where - cap)
        policy[t] = take
    # The block's value: what the first round takes plus its future at the stock kept.
    value = reached.reshape(2 * n, classes)
    np.take(future.reshape(2 * n, classes), (regimes * n + levels - take).ravel(), axis=0,
            out=value, mode="clip")
    value += take.reshape(-1, 1)
    return HarvestPolicy(policy, (value @ weights).reshape(2, n), belief, discount)


def _window_argmax(keys: NDArray[np.float64], width: int) -> tuple[NDArray[np.float64], NDArray[np.int64]]:
    """Maximum of ``keys[..., i : i + width]`` for every ``i`` along the last axis, and its place.

    Ties go to the later place. Sparse-table doubling: blocks of 1, 2, 4, ... places are merged
    pairwise, then two overlapping blocks cover the width, in O(n log width) vectorised steps.
    """
    best = keys
    place = np.broadcast_to(np.arange(keys.shape[-1]), keys.shape)
    span = 1
    while 2 * span <= width:
        later = best[..., span:] >= best[..., :-span]
        best = np.where(later, best[..., span:], best[..., :-span])
        place = np.where(later, place[..., span:], place[..., :-span])
        span *= 2
    shift, size = width - span, best.shape[-1] - (width - span)
    later = best[..., shift:] >= best[..., :size]
    return (np.where(later, best[..., shift:], best[..., :size]),
            np.where(later, place[..., shift:], place[..., :size]))


def selfish_group_take(
    study: Study,
    rounds: int,
    rng: np.random.Generator,
    stock: int | None = None,
    degraded: bool = False,
    replicates: int = 2000,
) -> float:
    """Expected total a group takes when every seat asks the maximum every round.

    Simulated through ``rounds.advance`` for ``rounds`` rounds from ``stock``
    (default the initial stock), thresholds drawn from the study's rule and
    flips from ``rng``; the mean over ``replicates`` groups is returned. The
    end rule is not applied: the caller gives the number of rounds played.
    """
    if rounds < 1 or replicates < 1:
        raise ValueError(f"rounds and replicates must be at least 1, got {rounds} and {replicates}")
    spec = study.threshold
    start = study.resource.initial_stock if stock is None else stock
    current = np.full(replicates, start, dtype=np.int64)
    regime = np.full(replicates, degraded)
    if spec.rule == "uniform":
        threshold = rng.uniform(spec.low, spec.high, replicates)
    else:
        threshold = np.full(replicates, np.nan if spec.rule == "none" else float(spec.value))
    asked = np.full((replicates, study.seats), study.resource.max_harvest, dtype=np.int64)
    total = np.zeros(replicates)
    block = 0
    for k in range(1, rounds + 1):
        step = advance(
            study, block, np.full(replicates, k), current, regime, threshold, asked,
            rng.random(replicates), np.zeros(replicates),
        )
        total += step.taken.sum(axis=1)
        current, regime = step.stock_after, step.degraded_after
    return float(total.mean())
