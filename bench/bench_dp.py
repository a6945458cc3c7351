"""Time the social-optimum dynamic programme on a 1,000-level stock grid over 30 rounds.

Run from the repository root:  python -m bench.bench_dp
Prints median, min and max wall time over the repeats, the median CPU time of this process
(on a shared machine wall time includes waiting for a core) and the 1-minute load average
before the runs. Target: under 0.2 s wall. Figures: docs/performance.md.
"""

from __future__ import annotations

import os
import statistics
import time

from ebbtide.game_logic.benchmarks import optimal_group_policy, threshold_belief
from ebbtide.game_logic.study import parse_study

# An invented stock of 1,000 units; only the grid size matters for the timing.
STUDY = """
[session]
id = "bench-grid"
title = "Benchmark grid (invented)"
[groups]
count = 1
seats_per_group = {seats}
[resource]
capacity = 1000
initial_stock = 800
max_harvest = {cap}
[threshold]
rule = "{rule}"
{threshold}
recovery_gap = {gap}
flip_probability = 0.7
[[blocks]]
name = "season"
rounds = 30
"""

CASES = {
    "no threshold, group max 100": dict(seats=10, cap=10, rule="none", threshold="", gap=15),
    "fixed threshold, group max 100": dict(seats=10, cap=10, rule="fixed", threshold="value = 300", gap=150),
    "uniform 250..450 (200 classes), group max 100": dict(
        seats=10, cap=10, rule="uniform", threshold="low = 250\nhigh = 450", gap=150
    ),
    "fixed threshold, group max 1,000": dict(
        seats=10, cap=100, rule="fixed", threshold="value = 300", gap=150
    ),
}


def main(repeats: int = 7) -> None:
    for label, fields in CASES.items():
        study = parse_study(STUDY.format(**fields))
        classes = len(threshold_belief(study).values)
        times = []
        cpu = []
        loads = []
        for _ in range(repeats):
            loads.append(os.getloadavg()[0])
            start, start_cpu = time.perf_counter(), time.process_time()
            optimal_group_policy(study, rounds=30)
            times.append(time.perf_counter() - start)
            cpu.append(time.process_time() - start_cpu)
        print(f"{label:48s} classes={classes:4d}  median {statistics.median(times):.3f} s"
              f"  min {min(times):.3f} s  max {max(times):.3f} s  ({repeats} runs)"
              f"  cpu median {statistics.median(cpu):.3f} s  load1 {min(loads):.2f}..{max(loads):.2f}")


if __name__ == "__main__":
    main()
