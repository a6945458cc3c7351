"""Effect sizes with memory linear in the data, and early-warning trends that honour ties."""

from __future__ import annotations

import tracemalloc
import warnings

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from ebbtide.analysis.comparisons import common_language_interval, compare_two, placement_values
from ebbtide.game_logic.early_warning import (
    detrended,
    kendall_trend,
    kendall_trends,
    rolling_lag1_autocorrelation,
    rolling_variance,
)

# The path of the issue: lag-1 autocorrelation over windows of 4 has two values that are
# 0.5 in exact arithmetic but differ by ~1e-16 in floating point.
ISSUE_PATH = [100, 98, 99, 97, 96, 96, 94, 94, 96]


def test_placement_values_average_to_the_mann_whitney_common_language_effect():
    rng = np.random.default_rng(4)
    x, y = rng.integers(0, 12, 300).astype(float), rng.integers(2, 14, 200).astype(float)  # many ties
    x_places, y_places = placement_values(x, y)
    u = stats.mannwhitneyu(x, y).statistic  # scipy.stats reference: CL = U / (n_x n_y)
    assert_allclose(x_places.mean(), u / (x.size * y.size), rtol=1e-12)
    assert_allclose(y_places.mean(), u / (x.size * y.size), rtol=1e-12)
    # Hand count of one placement value: share of y below x[0], ties one half (DeLong et al. 1988).
    assert_allclose(x_places[0], ((y < x[0]).sum() + 0.5 * (y == x[0]).sum()) / y.size, rtol=1e-12)


def test_delong_interval_agrees_with_a_pairwise_bootstrap_of_the_effect_size():
    # scipy.stats.bootstrap of the all-pairs statistic (the old quadratic method) is the reference;
    # the DeLong standard error and the bootstrap's agree to about 10 % at these sizes.
    rng = np.random.default_rng(8)
    x, y = rng.normal(1.0, 2.0, 60), rng.normal(0.0, 2.0, 50)

    def pairwise(a, b, axis=-1):
        a, b = np.moveaxis(a, axis, -1), np.moveaxis(b, axis, -1)
        return (a[..., :, None] > b[..., None, :]).mean(axis=(-2, -1))

    boot = stats.bootstrap((x, y), pairwise, vectorized=True, n_resamples=4000, rng=rng, method="percentile")
    estimate, low, high = common_language_interval(x, y)
    assert_allclose(high - low, boot.confidence_interval.high - boot.confidence_interval.low, rtol=0.15)
    assert_allclose([low, high], [boot.confidence_interval.low, boot.confidence_interval.high], atol=0.04)
    assert low < estimate < high


def test_compare_two_on_forty_thousand_groups_holds_memory_linear_in_the_data():
    # Defect: the bootstrap built a resamples x n_x x n_y array (here 4999 x 4e8 booleans).
    rng = np.random.default_rng(1)
    x, y = rng.normal(10, 3, 20_000), rng.normal(10.2, 3, 20_000)
    tracemalloc.start()
    result = compare_two(x, y, rng)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < 200 * 2**20
    assert result.resamples >= 999
    assert_allclose(result.u, stats.mannwhitneyu(x, y).statistic, atol=0)  # scipy.stats reference


def test_kendall_trends_match_scipy_tau_b_with_ties_and_gaps():
    rng = np.random.default_rng(3)
    rows = rng.integers(0, 5, (40, 12)).astype(float)
    rows[rng.random(rows.shape) < 0.2] = np.nan
    ours = kendall_trends(rows)
    for row, tau in zip(rows, ours, strict=True):
        keep = ~np.isnan(row)
        # scipy.stats.kendalltau (tau-b, ties in y) is the reference.
        reference = stats.kendalltau(np.arange(row.size)[keep], row[keep]).statistic
        if keep.sum() < 3 or np.ptp(row[keep]) == 0:
            assert np.isnan(tau)
        else:
            assert_allclose(tau, reference, rtol=1e-12)


def test_issue_path_lag1_tau_is_0_072_with_ties_honoured():
    indicator = rolling_lag1_autocorrelation(ISSUE_PATH, 4)
    assert indicator[6] != indicator[7]  # floating point noise: the defect's cause
    keep = ~np.isnan(indicator)
    rounded = np.round(indicator[keep], 9)
    # scipy.stats.kendalltau on the values rounded to 1e-9 (ties honoured) gives 0.0716.
    reference = stats.kendalltau(np.arange(9)[keep], rounded).statistic
    assert_allclose(kendall_trend(indicator), reference, rtol=1e-12)
    assert round(kendall_trend(indicator), 3) == 0.072
    # Without rounding scipy breaks the tie and reports the defect's 0.138.
    assert round(stats.kendalltau(np.arange(9)[keep], indicator[keep]).statistic, 3) == 0.138


@pytest.fixture(scope="module")
def ewstools():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return pytest.importorskip("ewstools")


def test_issue_path_indicators_and_tau_match_the_ewstools_package(ewstools):
    # Reference: ewstools (Bury, PyPI "ewstools", TimeSeries.compute_auto / compute_var /
    # compute_ktau), rolling windows of 4 points on the raw path. Its ktau uses pandas'
    # Kendall correlation; rounding its indicators to 1e-9 first honours the ties.
    series = ewstools.TimeSeries(list(map(float, ISSUE_PATH)))
    series.compute_auto(rolling_window=4, lag=1)
    series.compute_var(rolling_window=4)
    assert_allclose(series.ews["ac1"], rolling_lag1_autocorrelation(ISSUE_PATH, 4), atol=1e-12)
    assert_allclose(series.ews["variance"], rolling_variance(ISSUE_PATH, 4), atol=1e-12)
    series.ews = series.ews.round(9)
    series.compute_ktau()
    ours = kendall_trend(rolling_lag1_autocorrelation(ISSUE_PATH, 4))
    assert_allclose(ours, series.ktau["ac1"], atol=1e-12)
    assert_allclose(kendall_trend(rolling_variance(ISSUE_PATH, 4)), series.ktau["variance"], atol=1e-12)


def test_gaussian_detrending_matches_ewstools_away_from_the_edges(ewstools):
    # ewstools' Gaussian detrending: sigma = (0.25 / 0.675) * bandwidth points (ksmooth's
    # convention, quartiles at +/- 0.25 bandwidth); edges differ (it reflects, we repeat the
    # end value), so only points more than four sigmas from either end are compared.
    rng = np.random.default_rng(2)
    path = 60 + np.cumsum(rng.normal(0, 2, 60))
    sigma = 2.0
    series = ewstools.TimeSeries(list(path))
    series.detrend(method="Gaussian", bandwidth=sigma * 0.675 / 0.25)
    ours = detrended(path, sigma)
    inner = slice(9, -9)
    assert_allclose(ours[inner], series.state["residuals"].to_numpy()[inner], atol=1e-9)
