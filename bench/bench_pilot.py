"""Time the offline pilot: groups per second through the demo design.

Run:  python bench/bench_pilot.py [--groups 1000] [--repeat 5]
Prints the best and median wall time of each strategy, plus peak memory.
"""

from __future__ import annotations

import argparse
import statistics
import time
import tracemalloc
from pathlib import Path

from ebbtide.exports.build import tables_from_outcomes
from ebbtide.game_logic.pilot import run_pilot
from ebbtide.game_logic.study import load_study

ROOT = Path(__file__).resolve().parent.parent


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--groups", type=int, default=1000)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--study", default=str(ROOT / "examples" / "brackwater-demo.toml"))
    args = parser.parse_args()
    study = load_study(args.study)
    for strategy in ("max", "sustainable", "conditional"):
        times = []
        for _ in range(args.repeat):
            start = time.perf_counter()
            run = run_pilot(study, args.groups, seed=1, strategy=strategy)
            tables_from_outcomes(study, "bench", run.outcomes, lambda o: ["pilot"] * len(o.asked),
                                 groups=args.groups)
            times.append(time.perf_counter() - start)
        tracemalloc.start()
        run_pilot(study, args.groups, seed=1, strategy=strategy)
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
        print(f"{strategy:12s} groups={args.groups} best={min(times):.3f}s "
              f"median={statistics.median(times):.3f}s rounds={len(run.outcomes)} "
              f"peak_mem={peak / 2**20:.1f} MiB")


if __name__ == "__main__":
    main()
