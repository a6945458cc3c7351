"""The renewable stock: growth laws, rationing, threshold and hysteresis.

All functions are pure and accept numpy arrays, so one call can advance many
groups at once (the pilot simulator) or one group (a live round).

Growth laws give the regrowth ``g(x)`` of what remains, ``x``, in one round:

- logistic:  g(x) = r x (1 - x/K)
- allee:     g(x) = r x (x/A - 1)(1 - x/K)      critical depensation; equilibria 0, A, K
- grazing:   g(x) = r x (1 - x/K) - c x^2 / (a^2 + x^2)   (May 1977, Nature 269:471)
- step:      logistic above ``step_at``, scaled by ``below_factor`` below it

The stock is counted in whole units. After regrowth it is rounded half up to a
whole unit and clipped to [0, K]; the rule is deterministic and documented in
``docs/model.md``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .study import GrowthSpec, ThresholdSpec


def logistic(x: ArrayLike, r: float, capacity: float) -> NDArray[np.float64]:
    """Logistic regrowth r x (1 - x/K), in units per round."""
    x = np.asarray(x, dtype=float)
    return r * x * (1.0 - x / capacity)


def allee(x: ArrayLike, r: float, capacity: float, allee_point: float) -> NDArray[np.float64]:
    """Critical depensation: negative regrowth below the Allee point A."""
    x = np.asarray(x, dtype=float)
    return r * x * (x / allee_point - 1.0) * (1.0 - x / capacity)


def grazing(
    x: ArrayLike, r: float, capacity: float, consumption: float, half_saturation: float
) -> NDArray[np.float64]:
    """Logistic regrowth less a saturating (Holling type III) grazing loss."""
    x = np.asarray(x, dtype=float)
    return logistic(x, r, capacity) - consumption * x**2 / (half_saturation**2 + x**2)


def step(
    x: ArrayLike, r: float, capacity: float, step_at: float, below_factor: float
) -> NDArray[np.float64]:
    """Logistic regrowth that drops to a fraction of itself below ``step_at``."""
    x = np.asarray(x, dtype=float)
    base = logistic(x, r, capacity)
    return np.where(x >= step_at, base, below_factor * base)


def growth(x: ArrayLike, spec: GrowthSpec, capacity: float) -> NDArray[np.float64]:
    """Regrowth of the good regime under the law a study names."""
    if spec.law == "logistic":
        return logistic(x, spec.r, capacity)
    if spec.law == "allee":
        return allee(x, spec.r, capacity, spec.allee_point)
    if spec.law == "grazing":
        return grazing(x, spec.r, capacity, spec.consumption, spec.half_saturation)
    if spec.law == "step":
        return step(x, spec.r, capacity, spec.step_at, spec.below_factor)
    raise ValueError(f"unknown growth law {spec.law!r}")


def round_half_up(x: ArrayLike) -> NDArray[np.int64]:
    """Round to whole units, halves upward (banker's rounding would favour even stocks)."""
    return np.floor(np.asarray(x, dtype=float) + 0.5).astype(np.int64)


def regrow(
    remaining: ArrayLike,
    degraded: ArrayLike,
    spec: GrowthSpec,
    capacity: int,
    degraded_factor: float,
) -> NDArray[np.int64]:
    """Stock after regrowth, in whole units within [0, K].

    Parameters
    ----------
    remaining : whole units left after the harvest, one per group.
    degraded : True where the group is in the degraded regime; its regrowth is
        multiplied by ``degraded_factor`` (a loss below zero, e.g. under the
        Allee law, is not scaled down: a collapsing stock keeps collapsing).
    """
    remaining = np.asarray(remaining, dtype=np.int64)
    g = growth(remaining, spec, capacity)
    factor = np.where(np.asarray(degraded, dtype=bool) & (g > 0), degraded_factor, 1.0)
    return np.clip(round_half_up(remaining + factor * g), 0, capacity)


def row_sums(units: NDArray[np.int64]) -> NDArray[np.int64]:
    """Each row's total of a (groups, seats) array of whole units, the same as ``sum(axis=1)``.

    Column by column: numpy's reduction along a short last axis is several times slower,
    and the pilot sums every group's harvests every round.
    """
    total = units[:, 0].copy()
    for seat in range(1, units.shape[1]):
        total += units[:, seat]
    return total


def ration(asked: ArrayLike, stock: ArrayLike) -> NDArray[np.int64]:
    """Share the stock when a group asks for more than there is.

    Rule (largest remainder, deterministic): when the total asked ``H`` exceeds
    the stock ``S``, seat ``i`` first gets ``floor(S * h_i / H)``; the units left
    over go one each to the seats with the largest remainders ``S * h_i mod H``,
    ties to the lower seat number. Exact integer arithmetic: the shares sum to
    ``S``, and no seat ever gets more than it asked.

    Parameters
    ----------
    asked : (groups, seats) whole units asked, or (seats,) for one group.
    stock : (groups,) whole units available, or a scalar for one group.
    """
    asked = np.asarray(asked, dtype=np.int64)
    single = asked.ndim == 1
    asked = np.atleast_2d(asked)
    stock = np.broadcast_to(np.asarray(stock, dtype=np.int64), asked.shape[:1])
    total = row_sums(asked)
    short = total > stock
    taken = asked.copy()
    if short.any():
        a, s, t = asked[short], stock[short][:, None], total[short][:, None]
        floors = (s * a) // t
        remainders = (s * a) % t
        leftover = s[:, 0] - floors.sum(axis=1)
        seat_index = np.broadcast_to(np.arange(a.shape[1]), a.shape)
        order = np.lexsort((seat_index, -remainders), axis=-1)
        rank = np.empty_like(order)
        np.put_along_axis(rank, order, seat_index, axis=-1)
        taken[short] = floors + (rank < leftover[:, None])
    return taken[0] if single else taken


def draw_threshold(spec: ThresholdSpec, rng: np.random.Generator) -> float | None:
    """The hidden threshold of one group, from the study's rule."""
    if spec.rule == "none":
        return None
    if spec.rule == "fixed":
        return float(spec.value)
    return float(rng.uniform(spec.low, spec.high))


def draw_thresholds(spec: ThresholdSpec, uniforms: NDArray[np.float64]) -> NDArray[np.float64]:
    """``draw_threshold`` for many groups from each one's first uniform draw; NaN: no threshold.

    numpy's ``Generator.uniform(low, high)`` is ``low + (high - low) * random()``
    (numpy/random/src/distributions: random_uniform); tests/test_seeding.py checks the match.
    """
    if spec.rule == "none":
        return np.full(uniforms.shape, np.nan)
    if spec.rule == "fixed":
        return np.full(uniforms.shape, float(spec.value))
    return spec.low + (spec.high - spec.low) * uniforms


def below_threshold(remaining: ArrayLike, threshold: ArrayLike) -> NDArray[np.bool_]:
    """True where what remains after the harvest lies below the threshold (NaN: no threshold).

    Whether the regime then flips is a separate matter (``next_regime``: the flip draw,
    and a stock already degraded cannot flip again).
    """
    remaining = np.asarray(remaining, dtype=float)
    threshold = np.asarray(threshold, dtype=float)
    has = ~np.isnan(threshold)
    return has & (remaining < np.where(has, threshold, 0.0))


def next_regime(
    degraded: ArrayLike,
    remaining: ArrayLike,
    threshold: ArrayLike,
    recovery_gap: float,
    flip_probability: float,
    flip_draw: ArrayLike,
) -> tuple[NDArray[np.bool_], NDArray[np.bool_], NDArray[np.bool_]]:
    """Regime after the harvest, with hysteresis.

    A good stock whose remainder falls below T flips to degraded when the
    round's uniform draw is below ``flip_probability``; a degraded stock returns
    to good only once its remainder climbs above T + ``recovery_gap``.
    ``threshold`` is NaN for groups without one.

    Returns (degraded_after, crossed, recovered), one entry per group.
    """
    degraded = np.asarray(degraded, dtype=bool)
    remaining = np.asarray(remaining, dtype=float)
    threshold = np.asarray(threshold, dtype=float)
    has = ~np.isnan(threshold)
    below = below_threshold(remaining, threshold)
    crossed = ~degraded & below & (np.asarray(flip_draw, dtype=float) < flip_probability)
    above_recovery = has & (remaining > np.where(has, threshold + recovery_gap, np.inf))
    recovered = degraded & above_recovery
    return (degraded | crossed) & ~recovered, crossed, recovered
