"""Time and peak memory of `ebbtide pilot` with its export written (rows streamed to disk).

Run from the repository root (one run per process, so peak memory is the run's own):
    python -m bench.bench_pilot_export [--groups 100000] [--study examples/within-subject.toml]
Peak memory is the process's maximum resident set (``resource.getrusage``), which counts
numpy and the CSV buffers that ``tracemalloc`` would miss. Figures: docs/performance.md.
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import tempfile
import time
from pathlib import Path

from click.testing import CliRunner

from ebbtide.server.cli import main as cli

ROOT = Path(__file__).resolve().parent.parent


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--groups", type=int, default=100_000)
    parser.add_argument("--study", default=str(ROOT / "examples" / "within-subject.toml"))
    parser.add_argument("--strategy", default="conditional")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        load = os.getloadavg()
        start = time.perf_counter()
        result = CliRunner().invoke(cli, ["pilot", args.study, "--groups", str(args.groups), "--seed", "1",
                                          "--strategy", args.strategy, "--out", folder])
        seconds = time.perf_counter() - start
        if result.exit_code != 0:
            sys.exit(result.output)
        with open(Path(folder) / "decisions.csv", "rb") as handle:
            rows = sum(1 for _ in handle) - 1
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**10  # KiB on Linux
    print(f"groups={args.groups} strategy={args.strategy} decision_rows={rows} time={seconds:.1f}s "
          f"peak_rss={peak:.0f} MiB load={tuple(round(x, 2) for x in load)}")


if __name__ == "__main__":
    main()
