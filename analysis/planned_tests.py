"""The group-level tests of the report, vectorised over many simulated studies.

Each test takes one value per group (the independent unit) and calls scipy exactly
as ``comparisons.compare_two`` (Mann–Whitney) and ``comparisons.compare_paired``
(Wilcoxon signed-rank) do, with ``axis=-1`` so that thousands of simulated studies
are tested in one call. Student's two-sample t test is offered for outcomes that
are close to normal and as the reference of the power module's check.
"""

from __future__ import annotations

import warnings

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats

TESTS = ("mann-whitney", "t-test", "wilcoxon")
PAIRED = {"wilcoxon"}


def group_test_pvalues(x: ArrayLike, y: ArrayLike, test: str) -> NDArray[np.float64]:
    """Two-sided p-values of ``test`` along the last axis (one value per group).

    ``x`` and ``y`` are (..., n_x) and (..., n_y); paired tests need n_x == n_y.
    A sample with no variation at all gives p = 1 (no evidence of a difference),
    as ``compare_paired`` does for all-zero differences, rather than NaN.
    """
    if test not in TESTS:
        raise ValueError(f"unknown test {test!r}; allowed: {', '.join(TESTS)}")
    x, y = np.asarray(x, float), np.asarray(y, float)
    if test in PAIRED and x.shape != y.shape:
        raise ValueError(f"paired test needs samples of equal shape, got {x.shape} and {y.shape}")
    # scipy picks its method (exact, permutation or normal approximation) once per call, from
    # ties anywhere in the batch; one sample at a time (the report) it picks per sample. Calling
    # rows with and without ties separately gives every row the report's own choice.
    batch = x.shape[:-1]
    x2, y2 = x.reshape(-1, x.shape[-1]), y.reshape(-1, y.shape[-1])
    if test in PAIRED:  # ties among |differences|, or zero differences
        tied = _has_ties(np.abs(x2 - y2)) | (x2 == y2).any(axis=-1)
    else:
        tied = _has_ties(np.concatenate([x2, y2], axis=1))
    p = np.empty(x2.shape[0])
    for rows in (tied, ~tied):
        if rows.any():
            p[rows] = _pvalues(x2[rows], y2[rows], test)
    return p.reshape(batch)


def _has_ties(values: NDArray[np.float64]) -> NDArray[np.bool_]:
    return (np.diff(np.sort(values, axis=-1), axis=-1) == 0).any(axis=-1)


def _pvalues(x: NDArray[np.float64], y: NDArray[np.float64], test: str) -> NDArray[np.float64]:
    with warnings.catch_warnings(), np.errstate(invalid="ignore", divide="ignore"):
        # Degenerate samples (every group alike) make scipy warn and return NaN: read as p = 1 below.
        warnings.simplefilter("ignore", category=RuntimeWarning)
        warnings.simplefilter("ignore", category=UserWarning)
        if test == "mann-whitney":
            p = stats.mannwhitneyu(x, y, alternative="two-sided", method="auto", axis=-1).pvalue
        elif test == "t-test":
            p = stats.ttest_ind(x, y, axis=-1).pvalue
        else:
            same = np.all(x == y, axis=-1)
            p = np.ones(same.shape)
            if (~same).any():
                p[~same] = stats.wilcoxon(x[~same], y[~same], zero_method="wilcox",
                                          alternative="two-sided", axis=-1).pvalue
    p = np.asarray(p, dtype=float)
    return np.where(np.isnan(p), 1.0, p)
