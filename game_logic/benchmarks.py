"""Reference points for a design: sustainable yield, open access, equilibria.

Pure functions of the study's parameters. The analysis compares what groups
did against these numbers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from .resource import growth
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
