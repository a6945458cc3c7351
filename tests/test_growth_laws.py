"""Growth laws and bioeconomic reference points against published values."""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from ebbtide.game_logic import resource
from ebbtide.game_logic.benchmarks import (
    equilibria,
    gordon_schaefer_open_access,
    maximum_sustainable_yield,
)
from ebbtide.game_logic.study import GrowthSpec


def test_logistic_msy_is_rk_over_4_at_half_capacity():
    # Schaefer (1954); Clark, Mathematical Bioeconomics: MSY = rK/4 at x = K/2.
    msy = maximum_sustainable_yield(GrowthSpec(law="logistic", r=0.5), 100)
    assert_allclose(msy.harvest, 12.5, atol=1e-9)
    assert_allclose(msy.stock, 50.0, atol=1e-6)


def test_gordon_schaefer_open_access_stock_is_cost_over_price_times_catchability():
    # Gordon (1954): open access dissipates rent at x = c / (p q) = 2 / (10 * 0.01) = 20.
    oa = gordon_schaefer_open_access(r=0.5, capacity=100, catchability=0.01, price=10,
                                     cost_per_effort=2)
    assert_allclose(oa.stock, 20.0, rtol=1e-12)
    # Sustainable harvest equals regrowth at that stock: r x (1 - x/K) = 0.5*20*0.8 = 8.
    assert_allclose(oa.harvest, resource.logistic(20.0, 0.5, 100), rtol=1e-12)
    rent = 10 * 0.01 * oa.effort * oa.stock - 2 * oa.effort
    assert_allclose(rent, 0.0, atol=1e-9)


def test_allee_equilibria_are_zero_allee_point_and_capacity():
    # Critical depensation r x (x/A - 1)(1 - x/K): roots 0, A, K; A unstable, K stable
    # (Clark, Mathematical Bioeconomics, ch. on depensation; common textbook form).
    spec = GrowthSpec(law="allee", r=0.5, allee_point=20)
    found = equilibria(spec, 100)
    xs = [x for x, _ in found]
    assert_allclose(xs, [0.0, 20.0, 100.0], atol=1e-6)
    stability = [s for _, s in found]
    assert stability[1:] == [False, True]


@pytest.mark.parametrize(
    "x, r_expected, k_expected",
    [
        # Strogatz, Nonlinear Dynamics and Chaos, sec. 3.7: cusp at x = sqrt(3).
        (math.sqrt(3), 3 * math.sqrt(3) / 8, 3 * math.sqrt(3)),
        # Same parametric curves at x = 2: r = 16/25 = 0.64, k = 16/3 = 5.333.
        (2.0, 0.64, 16 / 3),
    ],
)
def test_budworm_fold_curves_match_strogatz(x, r_expected, k_expected):
    # Curves r = 2x^3/(1+x^2)^2, k = 2x^3/(x^2-1) (Strogatz sec. 3.7) for the law
    # r x (1 - x/k) - x^2/(1 + x^2): our grazing law with c = 1, a = 1.
    r = 2 * x**3 / (1 + x**2) ** 2
    k = 2 * x**3 / (x**2 - 1)
    assert_allclose([r, k], [r_expected, k_expected], rtol=1e-3)
    g = lambda y: float(resource.grazing(y, r, k, 1.0, 1.0))  # noqa: E731
    h = 1e-6
    assert abs(g(x)) < 1e-9  # an equilibrium ...
    assert abs((g(x + h) - g(x - h)) / (2 * h)) < 1e-6  # ... where the slope vanishes: a fold


def _grazing_fold(c_guess: float, x_lo: float, x_hi: float) -> tuple[float, float]:
    # f = f' = 0 for x(1 - x/10) - c x^2/(1+x^2): f = 0 gives c(x) = (1 - x/10)(1 + x^2)/x,
    # and f' = 0 there is an extremum of c(x).
    c_of = lambda x: (1 - x / 10) * (1 + x**2) / x  # noqa: E731
    dc = lambda x: (c_of(x + 1e-7) - c_of(x - 1e-7)) / 2e-7  # noqa: E731
    x = brentq(dc, x_lo, x_hi)
    return c_of(x), x


def test_grazing_folds_at_published_values():
    # May (1977), Nature 269:471, in the form x' = x(1 - x/10) - c x^2/(1 + x^2):
    # folds at c ~ 1.7872 (x ~ 1.138) and c ~ 2.6044 (x ~ 4.781), from f = f' = 0
    # (values as given in our issue, checked here by root-finding).
    c_low, x_low = _grazing_fold(1.8, 0.5, 2.5)
    c_high, x_high = _grazing_fold(2.6, 3.0, 7.0)
    assert_allclose([c_low, x_low], [1.7872, 1.138], atol=2e-3)
    assert_allclose([c_high, x_high], [2.6044, 4.781], atol=2e-3)
    # At the folds our grazing law has a double root.
    for c, x in ((c_low, x_low), (c_high, x_high)):
        assert abs(float(resource.grazing(x, 1.0, 10.0, c, 1.0))) < 1e-9


def _settle(x0: float, c: float, steps: int = 4000, dt: float = 0.05) -> float:
    x = x0
    for _ in range(steps):
        x = x + dt * float(resource.grazing(x, 1.0, 10.0, c, 1.0))
    return x


def test_grazing_law_shows_hysteresis_between_folds():
    # Sweep c up then down through [1.5, 2.9]: between the folds the state depends on
    # the path (May 1977): on the way up it stays high, on the way down it stays low.
    cs = np.round(np.arange(1.5, 2.91, 0.1), 3)
    x, up = 8.0, {}
    for c in cs:
        x = _settle(x, c, steps=800)
        up[c] = x
    down = {}
    for c in cs[::-1]:
        x = _settle(x, c, steps=800)
        down[c] = x
    assert up[2.2] > 4.0 and down[2.2] < 1.2  # two stable states at the same c
    assert up[1.5] == pytest.approx(down[1.5], abs=1e-3)  # one state below the lower fold
    assert up[2.9] == pytest.approx(down[2.9], abs=1e-3)  # one state above the upper fold
    spec = GrowthSpec(law="grazing", r=1.0, consumption=2.2, half_saturation=1.0)
    stable = [x for x, s in equilibria(spec, 10.0) if s and x > 0]
    assert len(stable) == 2


def test_regrowth_rounds_half_up_and_stays_within_capacity():
    spec = GrowthSpec(law="logistic", r=0.5)
    # 50 + 12.5 = 62.5 -> 63 (half up); 100 stays at capacity; 0 stays 0.
    out = resource.regrow([50, 100, 0], [False, False, False], spec, 100, 0.2)
    assert out.tolist() == [63, 100, 0]


def test_degraded_regime_scales_positive_regrowth_only():
    spec = GrowthSpec(law="logistic", r=0.5)
    good, bad = resource.regrow([40, 40], [False, True], spec, 100, 0.2)
    assert (good, bad) == (52, 42)  # 40 + 12 and 40 + 0.2 * 12 = 42.4 -> 42
    allee = GrowthSpec(law="allee", r=0.5, allee_point=20)
    # Below the Allee point the loss is not softened by the degraded factor.
    loss = float(resource.allee(10, 0.5, 100, 20))
    out = resource.regrow([10], [True], allee, 100, 0.2)
    assert out[0] == resource.round_half_up(10 + loss)
