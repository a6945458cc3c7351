"""Group-level tests: treatments against each other, and blocks within the same groups.

The group is the independent unit (seats of a group influence one another), so
every test here takes one number per group. Between treatments: Mann–Whitney U,
a permutation test of the difference in means, the rank-biserial correlation
and the common-language effect size with bootstrap confidence intervals. Between
blocks of the same groups: the Wilcoxon signed-rank test.
"""

from __future__ import annotations

import itertools
import warnings
from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike
from scipy import stats


@dataclass(frozen=True)
class TwoSampleComparison:
    """Mann–Whitney and permutation test of x against y, with effect sizes.

    ``u`` is scipy's U of x (pairs with x > y, ties counted one half);
    ``common_language`` = U / (n_x n_y), the chance that a random x exceeds a
    random y (McGraw & Wong 1992); ``rank_biserial`` = 2 CL - 1 (Kerby 2014).
    Intervals are percentile bootstrap intervals at ``confidence``.
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


def _common_language(x, y, axis=-1):
    x, y = np.moveaxis(x, axis, -1), np.moveaxis(y, axis, -1)
    greater = (x[..., :, None] > y[..., None, :]).mean(axis=(-2, -1))
    ties = (x[..., :, None] == y[..., None, :]).mean(axis=(-2, -1))
    return greater + 0.5 * ties


def _mean_difference(x, y, axis=-1):
    return np.mean(x, axis=axis) - np.mean(y, axis=axis)


def compare_two(
    x: ArrayLike, y: ArrayLike, rng: np.random.Generator, resamples: int = 9999, confidence: float = 0.95
) -> TwoSampleComparison:
    """Compare two independent samples (one value per group); needs at least two in each."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    if x.size < 2 or y.size < 2:
        raise ValueError(f"each sample needs at least 2 groups, got {x.size} and {y.size}")
    mw = stats.mannwhitneyu(x, y, alternative="two-sided", method="auto")
    perm = stats.permutation_test(
        (x, y), _mean_difference, permutation_type="independent", vectorized=True,
        n_resamples=resamples, alternative="two-sided", rng=rng,
    )
    intervals = {}
    for name, statistic in (("mean_difference", _mean_difference), ("common_language", _common_language)):
        with warnings.catch_warnings():
            # A degenerate resample distribution (all groups equal) is reported as NaN, not an error.
            warnings.simplefilter("ignore", category=stats.DegenerateDataWarning)
            boot = stats.bootstrap(
                (x, y), statistic, vectorized=True, paired=False, n_resamples=min(resamples, 4999),
                confidence_level=confidence, method="percentile", rng=rng,
            )
        intervals[name] = (float(boot.confidence_interval.low), float(boot.confidence_interval.high))
    cl = float(mw.statistic) / (x.size * y.size)
    return TwoSampleComparison(
        n_x=x.size, n_y=y.size, mean_x=float(x.mean()), mean_y=float(y.mean()),
        u=float(mw.statistic), p_mann_whitney=float(mw.pvalue), p_permutation=float(perm.pvalue),
        mean_difference=float(x.mean() - y.mean()),
        mean_difference_low=intervals["mean_difference"][0],
        mean_difference_high=intervals["mean_difference"][1],
        common_language=cl,
        common_language_low=intervals["common_language"][0],
        common_language_high=intervals["common_language"][1],
        rank_biserial=2 * cl - 1,
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
