"""Early-warning indicators and the health signal of the ``signal`` treatment."""

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from scipy import optimize

from ebbtide.game_logic.early_warning import (
    BANDS,
    TRENDS,
    HealthSignal,
    detrended,
    health_reading,
    health_signal,
    indicator_trends,
    kendall_trend,
    lag1_autocorrelation,
    rolling_lag1_autocorrelation,
    rolling_variance,
)
from ebbtide.game_logic.resource import grazing

# The grazing law of the fold test: x' = x(1 - x/10) - c x^2/(1 + x^2) (May 1977,
# Nature 269:471; the same form as the budworm model in Strogatz, Nonlinear
# Dynamics and Chaos, sec. 3.7, from memory).
R, K, A = 1.0, 10.0, 1.0
UPPER_FOLD_C = 2.6044  # f = f' = 0, re-derived below with scipy
LOWER_FOLD_C = 1.7872


def simulate_grazing(consumption, seed, noise_sd=0.1, x0=8.0, burn_in=100):
    """x_{t+1} = x_t + g(x_t) + noise; burn-in at the first c so the path starts settled."""
    cs = np.concatenate([np.full(burn_in, consumption[0]), consumption])
    rng = np.random.default_rng(seed)
    x = np.empty(cs.size)
    x[0] = x0
    for t in range(cs.size - 1):
        step = x[t] + float(grazing(x[t], R, K, cs[t], A)) + rng.normal(0.0, noise_sd)
        x[t + 1] = max(0.0, step)
    return x[burn_in:]


def test_fold_values_match_the_fold_condition():
    # c(x) = (1 - x/K)(1 + x^2)/x solves f = 0 for c; its turning points are the
    # folds (f = f' = 0). Check values computed here with scipy.optimize.
    c_of_x = lambda x: (1 - x / K) * (1 + x**2) / x  # noqa: E731
    lower = optimize.minimize_scalar(c_of_x, bounds=(0.5, 3), method="bounded")
    upper = optimize.minimize_scalar(lambda x: -c_of_x(x), bounds=(3, 9), method="bounded")
    assert_allclose([lower.fun, -upper.fun], [LOWER_FOLD_C, UPPER_FOLD_C], atol=1e-4)


SEEDS = range(20)


def test_indicators_rise_when_consumption_creeps_towards_the_upper_fold():
    ramp = np.linspace(1.0, 2.59, 400)  # stops just short of the fold at c = 2.6044
    trends = []
    for seed in SEEDS:
        path = simulate_grazing(ramp, seed)
        assert path.min() > 3.0  # still on the upper branch: a warning, not a post-mortem
        trends.append(indicator_trends(path))
    variance_taus = np.array([t.variance_tau for t in trends])
    ar1_taus = np.array([t.ar1_tau for t in trends])
    # Critical slowing down (Scheffer et al. 2009; Dakos et al. 2012): both rise.
    assert variance_taus.mean() > 0.5
    assert ar1_taus.mean() > 0.5
    assert variance_taus.min() > 0.0
    assert ar1_taus.min() > 0.3


def test_indicators_show_no_rise_when_consumption_stays_far_from_the_fold():
    fixed = np.full(400, 1.0)  # below the lower fold: one stable state, far from any fold
    trends = [indicator_trends(simulate_grazing(fixed, seed)) for seed in SEEDS]
    # Single overlapping-window taus scatter widely under no trend (Dakos et al. 2012
    # test them against surrogates); their mean over many runs sits near zero.
    assert np.mean([t.variance_tau for t in trends]) < 0.15
    assert np.mean([t.ar1_tau for t in trends]) < 0.15


def test_rolling_variance_matches_pandas():
    x = np.random.default_rng(3).normal(size=30)
    expected = pd.Series(x).rolling(7).var().to_numpy()  # pandas: reference library, ddof=1
    assert_allclose(rolling_variance(x, 7), expected, rtol=1e-12, equal_nan=True)


def test_rolling_lag1_autocorrelation_matches_pandas():
    x = np.random.default_rng(4).normal(size=30).cumsum()
    expected = pd.Series(x).rolling(8).apply(lambda w: w.autocorr(lag=1), raw=False).to_numpy()
    assert_allclose(rolling_lag1_autocorrelation(x, 8), expected, rtol=1e-10, equal_nan=True)


def test_lag1_autocorrelation_of_alternating_series_is_minus_one():
    # x_t = (-1)^t: x_t = -x_{t-1} exactly (definition of Pearson correlation).
    assert_allclose(lag1_autocorrelation([1, -1, 1, -1, 1, -1]), -1.0, atol=1e-12)


def test_kendall_trend_of_increasing_series_is_one():
    # tau = 1 for a strictly increasing series (Kendall 1938, definition).
    assert_allclose(kendall_trend([np.nan, 1, 2, 5, 9]), 1.0, atol=1e-12)


def test_detrended_removes_a_straight_line_away_from_the_edges():
    # A Gaussian kernel preserves straight lines (symmetric weights) away from the
    # padded edges; common practice, no source.
    line = np.arange(40, dtype=float) * 2.0
    assert_allclose(detrended(line, 2.0)[8:-8], 0.0, atol=1e-9)


@pytest.mark.parametrize("window", [1, 0, 2.5, True])
def test_rolling_lag1_autocorrelation_rejects_bad_window(window):
    with pytest.raises(ValueError, match="window must be a whole number of rounds, at least 3"):
        rolling_lag1_autocorrelation([1, 2, 3, 4], window)


def test_detrended_rejects_nonpositive_bandwidth():
    with pytest.raises(ValueError, match="bandwidth must be a positive number"):
        detrended([1, 2, 3], 0)


# The health signal (band, trend) of the ``signal`` treatment.


def test_health_signal_moves_towards_alarm_on_path_declining_to_collapse():
    decline = [90, 86, 80, 73, 65, 56, 46, 35, 24, 12]
    bands = [health_signal(decline[: n + 1], 100).band for n in range(len(decline))]
    ranks = [BANDS.index(b) for b in bands]
    assert ranks == sorted(ranks)  # never eases on the way down
    assert bands[0] == "calm"
    assert bands[-1] == "alarm"
    assert health_signal(decline, 100).trend == "falling"


def test_health_signal_stays_calm_on_steady_path_near_capacity():
    rng = np.random.default_rng(11)
    steady = np.clip(np.round(85 + rng.normal(0, 2.0, size=30)), 0, 100).astype(int)
    for n in range(1, steady.size + 1):
        assert health_signal(steady[:n], 100).band == "calm"
    assert health_signal(steady, 100).trend == "steady"


def test_health_signal_trend_rises_when_stock_grows():
    assert health_signal([30, 36, 43, 50], 100).trend == "rising"


def test_health_signal_band_is_not_a_function_of_the_stock_level_alone():
    # Same stock now, different histories: a band cut at one stock level would
    # hand that level to the players.
    assert health_signal([40, 40, 40, 40], 100).band == "calm"
    assert health_signal([70, 60, 50, 40], 100).band == "alarm"


def test_health_signal_is_calm_and_steady_before_any_round():
    assert health_signal([], 100) == HealthSignal("calm", "steady")
    assert health_signal([80], 100) == HealthSignal("calm", "steady")


def test_health_signal_alarms_on_exhausted_stock():
    assert health_signal([10, 4, 0], 100).band == "alarm"


def test_health_signal_depends_on_path_and_capacity_only():
    # The same path gives the same signal whatever the hidden threshold: the
    # function has no threshold argument, and it is scale-free in capacity.
    path = [80, 74, 69, 61, 58, 52]
    assert health_signal(path, 100) == health_signal([10 * s for s in path], 1000)


def test_health_reading_names_the_reasons_for_a_warning():
    reading = health_reading([60, 50, 40], 100)
    assert reading.band == "alarm"
    assert set(reading.reasons) == {"low_stock", "falling_fast"}
    assert reading.signal.band in BANDS and reading.signal.trend in TRENDS
    assert_allclose(reading.score, 0.6 * reading.level + 0.6 * reading.pace + 0.3 * reading.slowing,
                    atol=1e-12)


def test_health_reading_rejects_negative_stock():
    with pytest.raises(ValueError, match="each a number of units >= 0"):
        health_reading([10, -1], 100)


def test_health_reading_rejects_nonpositive_capacity():
    with pytest.raises(ValueError, match="capacity must be a positive number of units"):
        health_reading([10, 9], 0)


def test_signal_view_carries_words_only_and_not_the_threshold():
    from ebbtide.game_logic.rounds import resolve, start_block
    from ebbtide.game_logic.seeding import round_rng
    from ebbtide.game_logic.study import parse_study
    from ebbtide.game_logic.treatments import participant_view

    study = parse_study(
        '[session]\nid = "fennick-signal"\ntitle = "Fennick (test)"\n'
        "[groups]\ncount = 1\nseats_per_group = 2\n"
        "[resource]\nmax_harvest = 15\n"
        '[threshold]\nrule = "fixed"\nvalue = 41.5\n'
        '[[blocks]]\nname = "signalled"\ntreatment = "signal"\nrounds = 6\n'
    )
    state = start_block(study, 3, 0, 0)
    for r in range(1, 5):
        state, _ = resolve(study, state, [15, 15], round_rng(3, 0, 0, r))
    danger = participant_view(study, state, 0, None, 0.0)["danger"]
    assert set(danger) == {"kind", "band", "trend", "reasons"}
    assert danger["band"] == "alarm"
    assert set(danger["reasons"]) <= {"low_stock", "falling_fast", "slow_recovery"}
    assert all(isinstance(v, str) for v in [danger["band"], danger["trend"], *danger["reasons"]])
