"""Power by simulation: how many groups a planned treatment comparison needs.

For each number of groups, many whole studies are simulated with a behaviour model
(``game_logic.pilot.play``: the core's rounds, the phone's information, each group's
draws from the seed tree); every planned hypothesis is tested on each simulated
study with the report's group-level test (``planned_tests.group_test_pvalues``), and
power is the share of studies whose test rejects at the planned level. Its Monte
Carlo standard error is sqrt(p (1 - p) / sims).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from ebbtide.game_logic.behaviour import Model
from ebbtide.game_logic.pilot import RoundStep, play
from ebbtide.game_logic.study import Study

from .planned_tests import group_test_pvalues

OUTCOMES = ("group_harvest_per_round", "share_degraded", "crossed", "final_stock")
GROUPS_PER_CHUNK = 20_000  # simulated groups held in memory at once


@dataclass(frozen=True)
class Hypothesis:
    """One planned comparison: between treatments within a block, or a block against the one before.

    ``x`` and ``y`` name treatments (``between``) or 1-based blocks (``within``);
    ``block`` is the 1-based block (of ``x`` for ``within``).
    """

    kind: str
    block: int
    x: str
    y: str
    outcome: str
    test: str
    direction: str = "two-sided"
    level: float = 0.05

    @property
    def label(self) -> str:
        if self.kind == "between":
            return f"block {self.block}: {self.x} vs {self.y} ({self.outcome}, {self.test})"
        return f"block {self.x} vs block {self.y} ({self.outcome}, {self.test})"


def planned_hypotheses(study: Study, outcome: str = "group_harvest_per_round",
                       level: float = 0.05) -> list[Hypothesis]:
    """The comparisons a design is built for, tested as the report tests them.

    Every pair of treatments rotated within a block (Mann–Whitney, as
    ``comparisons.treatment_comparisons``), and each block against the one
    before when their treatments differ (Wilcoxon signed-rank, as
    ``comparisons.block_comparisons``).
    """
    if outcome not in OUTCOMES:
        raise ValueError(f"unknown outcome {outcome!r}; allowed: {', '.join(OUTCOMES)}")
    found = []
    for b, block in enumerate(study.blocks, start=1):
        for x, y in itertools.combinations(dict.fromkeys(block.all_treatments), 2):
            found.append(Hypothesis("between", b, x, y, outcome, "mann-whitney", level=level))
    for b in range(1, len(study.blocks)):
        if study.blocks[b].all_treatments != study.blocks[b - 1].all_treatments:
            found.append(Hypothesis("within", b + 1, str(b + 1), str(b), outcome, "wilcoxon", level=level))
    return found


def simulate_group_outcomes(
    study: Study, model: Model, seed: int, groups: NDArray[np.int64]
) -> dict[str, NDArray[np.float64]]:
    """Per group and block outcomes, (len(groups), blocks), as ``analysis.group_outcomes`` defines them."""
    shape = (groups.size, len(study.blocks))
    taken, played = np.zeros(shape), np.zeros(shape)
    degraded, crossed, final = np.zeros(shape), np.zeros(shape, dtype=bool), np.zeros(shape)

    def record(step: RoundStep) -> None:
        r, b = step.result, step.block
        taken[step.rows, b] += r.taken.sum(axis=1)
        played[step.rows, b] = step.round
        degraded[step.rows, b] += r.degraded_after
        crossed[step.rows, b] |= r.crossed
        final[step.rows, b] = r.stock_after

    play(study, model, seed, groups, record, live_draws=False)
    return {
        "group_harvest_per_round": taken / played,
        "share_degraded": degraded / played,
        "crossed": crossed.astype(float),
        "final_stock": final,
    }


def _padded(study: Study, groups: int) -> int:
    # Simulated study s numbers its groups s * padded + g, keeping g's rotated treatment.
    rotation = math.lcm(*(len(b.all_treatments) for b in study.blocks))
    return -(-groups // rotation) * rotation


def study_pvalues(
    study: Study, model: Model, hypotheses: Sequence[Hypothesis], groups: int, seed: int,
    sims: range,
) -> NDArray[np.float64]:
    """p-values (len(sims), hypotheses) of simulated studies numbered ``sims`` with ``groups`` groups."""
    padded = _padded(study, groups)
    ids = (np.asarray(sims)[:, None] * padded + np.arange(groups)[None, :]).ravel()
    outcomes = simulate_group_outcomes(study, model, seed, ids)
    result = np.empty((len(sims), len(hypotheses)))
    for j, h in enumerate(hypotheses):
        values = outcomes[h.outcome].reshape(len(sims), groups, -1)
        if h.kind == "between":
            block = study.blocks[h.block - 1]
            rotated = np.array([block.treatment_for(g) for g in range(groups)])
            x, y = values[:, rotated == h.x, h.block - 1], values[:, rotated == h.y, h.block - 1]
            if x.shape[1] < 2 or y.shape[1] < 2:
                result[:, j] = np.nan  # too few groups in an arm to test
                continue
        else:
            x, y = values[:, :, int(h.x) - 1], values[:, :, int(h.y) - 1]
        result[:, j] = group_test_pvalues(x, y, h.test)
    return result


@dataclass(frozen=True)
class PowerCurve:
    """Estimated power of each hypothesis at each number of groups."""

    groups: tuple[int, ...]
    labels: tuple[str, ...]
    sims: int
    power: NDArray[np.float64]  # (len(groups), hypotheses); NaN where an arm is too small
    levels: tuple[float, ...] = field(default=())

    @property
    def standard_error(self) -> NDArray[np.float64]:
        """Monte Carlo standard error of each estimate: sqrt(p (1 - p) / sims)."""
        return np.sqrt(self.power * (1 - self.power) / self.sims)

    def groups_for(self, target: float = 0.8) -> list[int | None]:
        """Smallest number of groups whose estimated power reaches ``target``, per hypothesis."""
        found = []
        for j in range(len(self.labels)):
            reached = [n for n, p in zip(self.groups, self.power[:, j], strict=True) if p >= target]
            found.append(reached[0] if reached else None)
        return found

    def rows(self) -> list[dict]:
        se = self.standard_error
        return [
            {"groups": n, "hypothesis": label, "power": float(self.power[i, j]),
             "standard_error": float(se[i, j]), "sims": self.sims}
            for i, n in enumerate(self.groups) for j, label in enumerate(self.labels)
        ]


PValueSampler = Callable[[int, range], NDArray[np.float64]]


def power_curve(
    sample_pvalues: PValueSampler, group_counts: Sequence[int], sims: int, levels: Sequence[float],
    labels: Sequence[str], chunk_groups: int = GROUPS_PER_CHUNK, jobs: int = 1,
    progress: bool | None = None,
) -> PowerCurve:
    """Estimate power at each group count from ``sims`` simulated studies.

    ``sample_pvalues(groups, sims_range)`` returns (len(sims_range), hypotheses)
    p-values; studies are drawn in chunks of about ``chunk_groups`` groups, over
    ``jobs`` processes. ``progress`` None shows a bar only on a terminal (tqdm).
    """
    from tqdm import tqdm

    if sims < 1:
        raise ValueError(f"sims must be at least 1, got {sims}")
    tasks = []
    for n in group_counts:
        step = max(1, chunk_groups // max(n, 1))
        tasks.extend((n, range(s, min(sims, s + step))) for s in range(0, sims, step))
    rejected = {n: np.zeros(len(labels)) for n in group_counts}
    untestable = {n: np.zeros(len(labels), dtype=bool) for n in group_counts}
    quiet = None if progress is None else not progress  # None: quiet unless on a terminal
    bar = tqdm(total=sims * len(group_counts), unit="study", disable=quiet, desc="simulated studies")
    with bar:
        if jobs > 1:
            with ProcessPoolExecutor(max_workers=jobs) as pool:
                results = pool.map(sample_pvalues, [t[0] for t in tasks], [t[1] for t in tasks])
                for (n, chunk), p in zip(tasks, results, strict=True):
                    _count(p, levels, rejected[n], untestable[n])
                    bar.update(len(chunk))
        else:
            for n, chunk in tasks:
                _count(sample_pvalues(n, chunk), levels, rejected[n], untestable[n])
                bar.update(len(chunk))
    power = np.array([np.where(untestable[n], np.nan, rejected[n] / sims) for n in group_counts])
    return PowerCurve(tuple(group_counts), tuple(labels), sims, power, tuple(levels))


def _count(p: NDArray[np.float64], levels, rejected, untestable) -> None:
    untestable |= np.isnan(p).any(axis=0)
    rejected += (p < np.asarray(levels)[None, :]).sum(axis=0)


@dataclass(frozen=True)
class StudySampler:
    """Picklable p-value sampler of a study and a model (for several processes)."""

    study: Study
    model: Model
    hypotheses: tuple[Hypothesis, ...]
    seed: int

    def __call__(self, groups: int, sims: range) -> NDArray[np.float64]:
        return study_pvalues(self.study, self.model, self.hypotheses, groups, self.seed, sims)


def study_power(
    study: Study, model: Model, group_counts: Sequence[int], sims: int, seed: int = 1,
    outcome: str = "group_harvest_per_round", level: float = 0.05, jobs: int = 1,
    progress: bool | None = None,
) -> tuple[PowerCurve, list[Hypothesis]]:
    """Power of every planned hypothesis of ``study`` under ``model``."""
    hypotheses = planned_hypotheses(study, outcome, level)
    if not hypotheses:
        raise ValueError(
            "the study plans no treatment comparison: no block rotates two treatments and "
            "no two blocks differ in treatment"
        )
    sampler = StudySampler(study, model, tuple(hypotheses), seed)
    curve = power_curve(sampler, group_counts, sims, [h.level for h in hypotheses],
                        [h.label for h in hypotheses], jobs=jobs, progress=progress)
    return curve, hypotheses


def draw_power_curve(curve: PowerCurve, stem: str, target: float = 0.8) -> list[str]:
    """Write the curve as ``stem.png`` and ``stem.svg`` (matplotlib); returns the paths."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(7, 4.2 + 0.2 * len(curve.labels)))
    se = curve.standard_error
    for j, label in enumerate(curve.labels):
        ax.errorbar(curve.groups, curve.power[:, j], yerr=1.96 * se[:, j], marker="o", capsize=3,
                    label=label)
    ax.axhline(target, color="0.4", linestyle="--", linewidth=1)
    ax.text(curve.groups[0], target + 0.02, f"{target:.0%} power", color="0.3", fontsize=8)
    ax.set_xlabel("groups in the study")
    ax.set_ylabel("power (share of simulated studies that reject)")
    ax.set_ylim(0, 1.02)
    ax.set_title(f"Power by simulation ({curve.sims} studies per point; bars: 95 % Monte Carlo interval)",
                 fontsize=9)
    ax.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.16), frameon=False)
    fig.tight_layout()
    paths = [f"{stem}.png", f"{stem}.svg"]
    for path in paths:
        fig.savefig(path, metadata={"Date": None} if path.endswith(".svg") else None)
    plt.close(fig)
    return paths


def parse_group_counts(text: str) -> list[int]:
    """``"4:40"`` (about ten steps), ``"4:40:4"`` (start:stop:step) or ``"6,12,18"``."""
    try:
        if ":" in text:
            parts = [int(p) for p in text.split(":")]
            if len(parts) not in (2, 3):
                raise ValueError
            start, stop = parts[0], parts[1]
            step = parts[2] if len(parts) == 3 else max(1, round((stop - start) / 9))
            counts = list(range(start, stop + 1, step))
            if counts and counts[-1] != stop and len(parts) == 2:
                counts.append(stop)
        else:
            counts = [int(p) for p in text.split(",")]
    except ValueError:
        counts = []
    if not counts or min(counts) < 2 or max(counts) > 10_000 or counts != sorted(set(counts)):
        raise ValueError(
            f"--groups holds {text!r}; allowed: START:STOP, START:STOP:STEP or a rising list "
            "like 6,12,18, each from 2 to 10000"
        )
    return counts
