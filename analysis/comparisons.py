"""Group-level tests: treatments against each other, and blocks within the same groups.

The group is the independent unit (seats of a group influence one another), so
every test here takes one number per group. Between treatments: Mann–Whitney U,
a permutation test of the difference in means, the rank-biserial correlation
and the common-language effect size. Between blocks of the same groups: the
Wilcoxon signed-rank test.

Memory stays linear in the number of groups: the common-language effect size
and its interval come from placement values (DeLong, DeLong & Clarke-Pearson
1988, Biometrics 44:837), computed from one sort of each sample; resampling
tests run in batches and use fewer resamples on very large samples (the count
is reported with every result).
"""

from __future__ import annotations

import itertools
import warnings
from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike
from scipy import stats

# Resampling work is capped at this many drawn values per test; with 25,000 groups
# that leaves 999 permutations (a p-value resolution of 0.001).
RESAMPLING_BUDGET = 10_000_000
MIN_RESAMPLES = 999
BATCH_VALUES = 2_000_000  # values held at once by one resampling batch (16 MB of floats)


@dataclass(frozen=True)
class TwoSampleComparison:
    """Mann–Whitney and permutation test of x against y, with effect sizes.

    ``u`` is scipy's U of x (pairs with x > y, ties counted one half);
    ``common_language`` = U / (n_x n_y), the chance that a random x exceeds a
    random y (McGraw & Wong 1992); ``rank_biserial`` = 2 CL - 1 (Kerby 2014).
    The mean difference has a percentile bootstrap interval; the
    common-language effect size a Wald interval on the logit scale with
    DeLong's variance (placement values), which keeps it inside (0, 1).
    ``resamples`` is the number of permutations and bootstrap draws used.
    """

    n_x: int
    n_y: int
    mean_x: float
    mean_y: float
    u: float
    p_mann_whitney: float
    p_permutation: float
    mean_difference: float
    mean_difference_low: float
    mean_difference_high: float
    common_language: float
    common_language_low: float
    common_language_high: float
    rank_biserial: float
    resamples: int = 0


def placement_values(x: ArrayLike, y: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """DeLong's placement values: for each x the share of y below it (ties one half), and
    for each y the share of x above it. Their means both equal U / (n_x n_y)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    sorted_x, sorted_y = np.sort(x), np.sort(y)
    below_y = np.searchsorted(sorted_y, x, side="left")
    not_above_y = np.searchsorted(sorted_y, x, side="right")
    x_places = (below_y + not_above_y) / (2.0 * y.size)
    above_x = x.size - np.searchsorted(sorted_x, y, side="right")
    not_below_x = x.size - np.searchsorted(sorted_x, y, side="left")
    y_places = (above_x + not_below_x) / (2.0 * x.size)
    return x_places, y_places


def common_language_interval(
    x: ArrayLike, y: ArrayLike, confidence: float = 0.95
) -> tuple[float, float, float]:
    """Common-language effect size with a logit-scale Wald interval and DeLong's variance.

    Variance: var(V_x)/n_x + var(V_y)/n_y over the placement values (DeLong et
    al. 1988). When the estimate is 0 or 1, or the variance is 0, the interval
    is the point itself: the data hold no information on its spread.
    """
    x_places, y_places = placement_values(x, y)
    estimate = float(x_places.mean())
    variance = x_places.var(ddof=1) / x_places.size + y_places.var(ddof=1) / y_places.size
    if not 0 < estimate < 1 or not variance > 0:
        return estimate, estimate, estimate
    z = stats.norm.ppf(0.5 + confidence / 2)
    logit = np.log(estimate / (1 - estimate))
    half = z * np.sqrt(variance) / (estimate * (1 - estimate))  # delta method on the logit
    low, high = 1 / (1 + np.exp(-(logit - half))), 1 / (1 + np.exp(-(logit + half)))
    return estimate, float(low), float(high)


def _mean_difference(x, y, axis=-1):
    return np.mean(x, axis=axis) - np.mean(y, axis=axis)


def resamples_for(size: int, wanted: int) -> int:
    """Resamples that keep the drawn values of one test under ``RESAMPLING_BUDGET``."""
    return int(min(wanted, max(MIN_RESAMPLES, RESAMPLING_BUDGET // max(size, 1))))


def compare_two(
    x: ArrayLike, y: ArrayLike, rng: np.random.Generator, resamples: int = 9999, confidence: float = 0.95
) -> TwoSampleComparison:
    """Compare two independent samples (one value per group); needs at least two in each."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    if x.size < 2 or y.size < 2:
        raise ValueError(f"each sample needs at least 2 groups, got {x.size} and {y.size}")
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        raise ValueError("every group value must be a finite number")
    size = x.size + y.size
    used = resamples_for(size, resamples)
    batch = max(1, BATCH_VALUES // size)
    mw = stats.mannwhitneyu(x, y, alternative="two-sided", method="auto")
    perm = stats.permutation_test(
        (x, y), _mean_difference, permutation_type="independent", vectorized=True,
        n_resamples=used, alternative="two-sided", rng=rng, batch=batch,
    )
    with warnings.catch_warnings():
        # A degenerate resample distribution (all groups equal) is reported as NaN, not an error.
        warnings.simplefilter("ignore", category=stats.DegenerateDataWarning)
        boot = stats.bootstrap(
            (x, y), _mean_difference, vectorized=True, paired=False, n_resamples=min(used, 4999),
            confidence_level=confidence, method="percentile", rng=rng, batch=batch,
        )
    cl, cl_low, cl_high = common_language_interval(x, y, confidence)
    return TwoSampleComparison(
        n_x=x.size, n_y=y.size, mean_x=float(x.mean()), mean_y=float(y.mean()),
        u=float(mw.statistic), p_mann_whitney=float(mw.pvalue), p_permutation=float(perm.pvalue),
        mean_difference=float(x.mean() - y.mean()),
        mean_difference_low=float(boot.confidence_interval.low),
        mean_difference_high=float(boot.confidence_interval.high),
        common_language=float(mw.statistic) / (x.size * y.size),
        common_language_low=cl_low,
        common_language_high=cl_high,
        rank_biserial=2 * float(mw.statistic) / (x.size * y.size) - 1,
        resamples=used,
    )


def treatment_comparisons(groups: pd.DataFrame, outcome: str, rng: np.random.Generator) -> pd.DataFrame:
    """Every pair of treatments within each block, one value of ``outcome`` per group.

    Empty when no block has two treatments with at least two groups each.
    """
    rows = []
    for block, cell in groups.groupby("block", sort=True):
        samples = {t: s[outcome].dropna().to_numpy() for t, s in cell.groupby("treatment", sort=True)}
        usable = [t for t, v in samples.items() if v.size >= 2]
        for a, b in itertools.combinations(usable, 2):
            result = compare_two(samples[a], samples[b], rng)
            rows.append({"block": block, "outcome": outcome, "treatment_x": a, "treatment_y": b,
                         **asdict(result)})
    return pd.DataFrame(rows)


@dataclass(frozen=True)
class PairedComparison:
    """Wilcoxon signed-rank test of paired values (x - y), one pair per group."""

    n: int
    median_difference: float
    statistic: float
    p_value: float


def compare_paired(x: ArrayLike, y: ArrayLike) -> PairedComparison:
    """Wilcoxon signed-rank test (scipy, zero differences dropped: Wilcoxon's own rule)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    if x.size != y.size or x.size < 2:
        raise ValueError(f"need at least 2 pairs of equal length, got {x.size} and {y.size}")
    difference = x - y
    if np.all(difference == 0):
        return PairedComparison(x.size, 0.0, float("nan"), 1.0)
    with warnings.catch_warnings():
        # With zero differences scipy switches from the exact to the normal approximation and says so.
        warnings.simplefilter("ignore", category=UserWarning)
        result = stats.wilcoxon(x, y, zero_method="wilcox", alternative="two-sided")
    median = float(np.median(difference))
    return PairedComparison(x.size, median, float(result.statistic), float(result.pvalue))


def block_comparisons(groups: pd.DataFrame, outcome: str) -> pd.DataFrame:
    """Each block against the next one, paired by group (within-subject designs)."""
    wide = groups.pivot_table(index="group", columns="block", values=outcome, aggfunc="first")
    names = groups.drop_duplicates("block").set_index("block")["block_name"]
    treatments = groups.groupby("block")["treatment"].agg(lambda t: "/".join(sorted(set(t))))
    rows = []
    blocks = sorted(wide.columns)
    for first, second in itertools.pairwise(blocks):
        pair = wide[[first, second]].dropna()
        if len(pair) < 2:
            continue
        result = compare_paired(pair[second], pair[first])
        rows.append({"outcome": outcome, "block_x": second, "block_y": first,
                     "block_x_name": names[second], "block_y_name": names[first],
                     "treatment_x": treatments[second], "treatment_y": treatments[first], **asdict(result)})
    return pd.DataFrame(rows)
