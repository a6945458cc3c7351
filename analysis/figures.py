"""Figures of the report, drawn with matplotlib's Agg backend and returned as PNG bytes."""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")  # no display in the field or in CI; must precede pyplot

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Patch  # noqa: E402
from matplotlib.ticker import MaxNLocator  # noqa: E402

from .group_outcomes import KEYS  # noqa: E402
from .survival import SurvivalResult  # noqa: E402

# Colour-blind-safe qualitative palette (Okabe & Ito 2008, "Color Universal Design").
DEGRADED_GREY = "#999999"
PALETTE = ("#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000")


def _png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=96, bbox_inches="tight")
    plt.close(figure)
    return buffer.getvalue()


def colours(treatments) -> dict[str, str]:
    return {t: PALETTE[i % len(PALETTE)] for i, t in enumerate(sorted(treatments))}


def sample_groups(groups: pd.DataFrame, rng: np.random.Generator, per_treatment: int = 4) -> pd.DataFrame:
    """A simple random sample of up to ``per_treatment`` group-blocks per block and treatment.

    Every group-block is equally likely to be shown, so crossing groups appear
    about as often as they occur (no "crossings first").
    """
    chosen = []
    for _, cell in groups.groupby(["block", "treatment"], sort=True):
        order = rng.permutation(len(cell))[:per_treatment]
        chosen.append(cell.iloc[np.sort(order)])
    return pd.concat(chosen).head(24)


def stock_paths(rounds: pd.DataFrame, chosen: pd.DataFrame, capacity: float) -> bytes:
    """Small multiples: stock at the start of each round, the revealed threshold, degraded rounds shaded."""
    return _png(stock_paths_figure(rounds, chosen, capacity))


def stock_paths_figure(rounds: pd.DataFrame, chosen: pd.DataFrame, capacity: float):
    count = len(chosen)
    columns = min(4, count)
    rows = int(np.ceil(count / columns))
    size = (3.0 * columns, 2.2 * rows + 0.5)
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
            ax.axvspan(r - 0.5, r + 0.5, color=DEGRADED_GREY, alpha=0.25, linewidth=0)
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
    keys = [Line2D([], [], color="#555555", marker="o", markersize=2.5, label="stock (colour: treatment)"),
            Line2D([], [], color="#D55E00", linestyle="--", linewidth=1, label="revealed threshold"),
            Patch(color=DEGRADED_GREY, alpha=0.25, label="round ended in the degraded regime")]
    figure.legend(handles=keys, loc="outside upper center", ncols=3, fontsize=8, frameon=False)
    return figure


def round_means(rounds: pd.DataFrame, groups: pd.DataFrame) -> pd.DataFrame:
    """Mean group harvest and stock by block, treatment and round, over the fixed horizon.

    A group that exhausted the stock counts with harvest 0 and stock 0 in the
    planned rounds it did not play (as in the benchmarks); a block cut short by
    a random stop simply has fewer groups in its later rounds (``groups``).
    """
    played = rounds[KEYS + ["treatment", "round", "total_taken", "stock_before"]]
    emptied = groups[groups["exhausted"]]
    missing = (emptied["horizon_rounds"] - emptied["rounds_played"]).to_numpy(int)
    # One row per lost round, built with repeat (no Python loop: a large pool has many such groups).
    lost = emptied.loc[emptied.index.repeat(missing), KEYS + ["treatment"]].reset_index(drop=True)
    offsets = np.arange(missing.sum()) - np.repeat(np.cumsum(missing) - missing, missing)
    lost["round"] = np.repeat(emptied["rounds_played"].to_numpy(int), missing) + 1 + offsets
    lost["total_taken"], lost["stock_before"] = 0, 0
    filled = pd.concat([played, lost], ignore_index=True) if len(lost) else played
    table = filled.groupby(["block", "treatment", "round"], sort=True).agg(
        groups=("total_taken", "size"), group_harvest_mean=("total_taken", "mean"),
        stock_mean=("stock_before", "mean"))
    return table.reset_index()


def round_means_figure(means: pd.DataFrame) -> bytes:
    """The standard figure of these games: mean harvest and mean stock by round, per block and treatment."""
    blocks = sorted(means["block"].unique())
    figure, axes = plt.subplots(2, len(blocks), figsize=(max(5.5, 3.6 * len(blocks)), 4.6), squeeze=False,
                                sharex="col", sharey="row", layout="constrained")
    palette = colours(means["treatment"].unique())
    for column, block in enumerate(blocks):
        for treatment, cell in means[means["block"] == block].groupby("treatment", sort=True):
            axes[0, column].plot(cell["round"], cell["group_harvest_mean"], color=palette[treatment],
                                 marker="o", markersize=3, label=treatment)
            axes[1, column].plot(cell["round"], cell["stock_mean"], color=palette[treatment], marker="o",
                                 markersize=3, label=treatment)
        axes[0, column].set_title(f"block {block}", fontsize=9)
        axes[1, column].set_xlabel("round", fontsize=8)
        axes[1, column].xaxis.set_major_locator(MaxNLocator(integer=True))
        for ax in axes[:, column]:
            ax.tick_params(labelsize=7)
    axes[0, 0].set_ylabel("mean group harvest (units)", fontsize=8)
    axes[1, 0].set_ylabel("mean stock at start (units)", fontsize=8)
    handles = [Line2D([], [], color=c, marker="o", markersize=3, label=t) for t, c in palette.items()]
    figure.legend(handles=handles, loc="outside right center", fontsize=8, frameon=False, title="treatment",
                  title_fontsize=8)
    return _png(figure)


def harvest_distributions(groups: pd.DataFrame) -> bytes:
    """Box plots of each group's harvest per planned round, per block and treatment."""
    cells = list(groups.groupby(["block", "treatment"], sort=True))
    figure, ax = plt.subplots(figsize=(max(4.0, 1.2 * len(cells) + 1.5), 3.2))
    palette = colours(groups["treatment"].unique())
    values = [cell["group_harvest_per_planned_round"].to_numpy() for _, cell in cells]
    boxes = ax.boxplot(values, patch_artist=True, widths=0.6)
    for patch, ((_, treatment), _) in zip(boxes["boxes"], cells, strict=True):
        patch.set_facecolor(palette[treatment])
        patch.set_alpha(0.6)
    ax.set_xticks(range(1, len(cells) + 1), [f"b{b}\n{t}" for (b, t), _ in cells], fontsize=8)
    ax.set_ylabel("group harvest per planned round (units)", fontsize=8)
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
