"""Time ``ebbtide report`` on pooled exports of about 1,000,000 decision rows.

Run:  python bench/bench_report.py [--rows 1000000] [--work /tmp/ebbtide-bench-report]

For each example design (between-groups, within-subject) it writes two pilot
exports with different seeds through ``ebbtide pilot``, pools them with
``ebbtide pool`` (about ``--rows`` decision rows in all; built once and kept in
``--work``), then runs ``ebbtide report`` in a fresh process and prints its wall
time and peak resident memory (the child's maximum RSS from ``getrusage``).
"""

from __future__ import annotations

import argparse
import csv
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DESIGNS = {
    # decision rows per simulated group, measured on small pilots (4 seats x ~13 rounds;
    # 5 seats x 2 blocks x 10 rounds)
    "between-groups": ("between-groups.toml", 54),
    "within-subject": ("within-subject.toml", 100),
}


def ebbtide(*args: str) -> None:
    subprocess.run([sys.executable, "-m", "ebbtide.server.cli", *args], check=True, cwd=ROOT,
                   stdout=subprocess.DEVNULL)


def pooled_export(name: str, rows: int, work: Path) -> Path:
    study, per_group = DESIGNS[name]
    out = work / f"{name}-{rows}"
    if (out / "datapackage.json").is_file():
        return out
    groups = rows // per_group // 2
    parts = []
    for seed in (1, 2):
        part = work / f"{name}-{rows}-part{seed}"
        if not (part / "datapackage.json").is_file():
            ebbtide("pilot", str(ROOT / "examples" / study), "--groups", str(groups), "--seed", str(seed),
                    "--out", str(part))
        parts.append(str(part))
    ebbtide("pool", *parts, "--out", str(out))
    return out


def decision_rows(folder: Path) -> int:
    with (folder / "decisions.csv").open(encoding="utf-8") as handle:
        return sum(1 for _ in csv.reader(handle)) - 1


MEASURE = """
import resource, runpy, sys
sys.argv = ["ebbtide", *sys.argv[1:]]
try:
    runpy.run_module("ebbtide.server.cli", run_name="__main__")
except SystemExit as exc:
    if exc.code:
        raise
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, file=sys.stderr)
"""


def time_report(folder: Path, work: Path) -> tuple[float, float]:
    """Wall time and peak RSS (GiB) of one ``ebbtide report`` run in a fresh process."""
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", MEASURE, "report", str(folder),
                           "--out", str(work / f"{folder.name}-report" / "report.html")],
                          check=True, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    seconds = time.perf_counter() - start
    peak_kib = int(done.stderr.strip().splitlines()[-1])  # ru_maxrss is in KiB on Linux
    return seconds, peak_kib / 2**20


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--work", default="/tmp/ebbtide-bench-report")
    parser.add_argument("--designs", default=",".join(DESIGNS))
    args = parser.parse_args()
    work = Path(args.work)
    work.mkdir(parents=True, exist_ok=True)
    for name in args.designs.split(","):
        folder = pooled_export(name, args.rows, work)
        seconds, peak_gib = time_report(folder, work)
        print(f"{name:15s} decisions={decision_rows(folder):,} report wall={seconds:.1f}s "
              f"peak_rss={peak_gib:.2f} GiB")


if __name__ == "__main__":
    main()
