"""Figures of the report, drawn with matplotlib's Agg backend and returned as PNG bytes."""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")  # no display in the field or in CI; must precede pyplot

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from matplotlib.ticker import MaxNLocator  # noqa: E402

from .group_outcomes import KEYS  # noqa: E402
from .survival import SurvivalResult  # noqa: E402

# Colour-blind-safe qualitative palette (Okabe & Ito 2008, "Color Universal Design").
PALETTE = ("#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000")


def _png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=96, bbox_inches="tight")
    plt.close(figure)
    return buffer.getvalue()


def colours(treatments) -> dict[str, str]:
    return {t: PALETTE[i % len(PALETTE)] for i, t in enumerate(sorted(treatments))}


def sample_groups(groups: pd.DataFrame, rng: np.random.Generator, per_treatment: int = 4) -> pd.DataFrame:
    """Up to ``per_treatment`` group-blocks per treatment, drawn with ``rng``, crossed ones first."""
    chosen = []
    for _, cell in groups.groupby(["block", "treatment"], sort=True):
        order = rng.permutation(len(cell))
        shuffled = cell.iloc[order]
        crossed, calm = shuffled[shuffled["crossed"]], shuffled[~shuffled["crossed"]]
        # Show at least one crossing and one calm path where both exist.
        take = pd.concat([crossed.head(per_treatment // 2), calm]).head(per_treatment)
        if len(take) < per_treatment:
            take = pd.concat([take, crossed.iloc[per_treatment // 2:]]).head(per_treatment)
        chosen.append(take)
    return pd.concat(chosen).head(24)


def stock_paths(rounds: pd.DataFrame, chosen: pd.DataFrame, capacity: float) -> bytes:
    """Small multiples: stock at the start of each round, the revealed threshold, degraded rounds shaded."""
    count = len(chosen)
    columns = min(4, count)
    rows = int(np.ceil(count / columns))
    size = (3.0 * columns, 2.2 * rows)
    figure, axes = plt.subplots(rows, columns, figsize=size, sharey=True, squeeze=False, layout="constrained")
    palette = colours(chosen["treatment"].unique())
    # Only the chosen groups' rounds: indexing the whole table would cost seconds on a large pool.
    wanted = rounds.merge(chosen[KEYS].drop_duplicates(), on=KEYS, how="inner")
    indexed = wanted.set_index(KEYS).sort_index()
    for ax, row in zip(axes.flat, chosen.itertuples(), strict=False):
        path = indexed.loc[(row.session_id, row.group_id, row.block)].sort_values("round")
        ax.plot(path["round"], path["stock_before"], color=palette[row.treatment], marker="o", markersize=2.5)
        degraded = path[path["regime_after"] == "degraded"]["round"]
        for r in degraded:
            ax.axvspan(r - 0.5, r + 0.5, color="#999999", alpha=0.25, linewidth=0)
        if not np.isnan(row.threshold):
            ax.axhline(row.threshold, color="#D55E00", linestyle="--", linewidth=1)
        ax.set_title(f"{row.group_id} b{row.block} {row.treatment}", fontsize=8)
        ax.set_ylim(0, capacity * 1.05)
        ax.tick_params(labelsize=7)
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    for ax in list(axes.flat)[count:]:
        ax.set_visible(False)
    figure.supxlabel("round", fontsize=8)
    figure.supylabel("stock at start of round", fontsize=8)
    return _png(figure)


def harvest_distributions(groups: pd.DataFrame) -> bytes:
    """Box plots of each group's mean harvest per round, per block and treatment."""
    cells = list(groups.groupby(["block", "treatment"], sort=True))
    figure, ax = plt.subplots(figsize=(max(4.0, 1.2 * len(cells) + 1.5), 3.2))
    palette = colours(groups["treatment"].unique())
    values = [cell["group_harvest_per_round"].to_numpy() for _, cell in cells]
    boxes = ax.boxplot(values, patch_artist=True, widths=0.6)
    for patch, ((_, treatment), _) in zip(boxes["boxes"], cells, strict=True):
        patch.set_facecolor(palette[treatment])
        patch.set_alpha(0.6)
    ax.set_xticks(range(1, len(cells) + 1), [f"b{b}\n{t}" for (b, t), _ in cells], fontsize=8)
    ax.set_ylabel("group harvest per round (units)", fontsize=8)
    return _png(figure)


def survival_curves(result: SurvivalResult) -> bytes:
    """Kaplan–Meier survival of the good regime per treatment, with pointwise bands."""
    figure, ax = plt.subplots(figsize=(5.5, 3.2))
    palette = colours(result.curves)
    for name, curve in result.curves.items():
        ax.step(curve["time"], curve["survival"], where="post", color=palette[name], label=name)
        ax.fill_between(curve["time"], curve["ci_low"], curve["ci_high"], step="post",
                        color=palette[name], alpha=0.15, linewidth=0)
    ax.set_ylim(0, 1.02)
    ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_xlabel("round", fontsize=8)
    ax.set_ylabel("share still in the good regime", fontsize=8)
    ax.legend(fontsize=8, frameon=False)
    return _png(figure)
