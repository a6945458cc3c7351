"""Time the offline pilot's simulation alone (``pilot.play``, nothing kept) over many groups.

Run from the repository root:
    python -m bench.bench_pilot [--groups 100000] [--repeat 5] [--study examples/within-subject.toml]
Prints, per behaviour model, the median and spread of wall time over the repeats and the
load average before each run (the machine may be shared). Target: 100,000 groups x 20
rounds under 1 s. The export written with it: bench/bench_pilot_export.py. Figures:
docs/performance.md.
"""

from __future__ import annotations

import argparse
import os
import statistics
import time
from pathlib import Path

import numpy as np

from ebbtide.game_logic.pilot import play
from ebbtide.game_logic.study import load_study

ROOT = Path(__file__).resolve().parent.parent


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--groups", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--study", default=str(ROOT / "examples" / "within-subject.toml"))
    args = parser.parse_args()
    study = load_study(args.study)
    groups = np.arange(args.groups)
    for strategy in ("max", "conditional", "threshold-averse"):
        play(study, strategy, 1, groups[:100], lambda step: None)  # warm-up: imports, caches
        times, loads = [], []
        for _ in range(args.repeat):
            loads.append(os.getloadavg()[0])
            start = time.perf_counter()
            play(study, strategy, 1, groups, lambda step: None)
            times.append(time.perf_counter() - start)
        print(f"{strategy:16s} groups={args.groups} median={statistics.median(times):.3f}s "
              f"min={min(times):.3f}s max={max(times):.3f}s runs={args.repeat} "
              f"load1={min(loads):.2f}..{max(loads):.2f}")


if __name__ == "__main__":
    main()
