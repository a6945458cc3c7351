"""Turn bench/live_load.py's JSON lines into the Markdown tables of docs/performance.md.

    python bench/summarise_load.py results.jsonl

Each cell is the median over repeats, with the range (min-max) in brackets; the ratio
column divides Ebbtide's median by the bare stack's median at the same N and server kind.
"""

from __future__ import annotations

import json
import statistics
import sys
from collections import defaultdict
from pathlib import Path


def cell(values: list[float], digits: int = 0) -> str:
    med = statistics.median(values)
    if len(values) == 1:
        return f"{med:.{digits}f}"
    return f"{med:.{digits}f} ({min(values):.{digits}f}-{max(values):.{digits}f})"


def main(path: str) -> None:
    runs = [json.loads(line) for line in Path(path).read_text().splitlines() if line.strip()]
    by_setup: dict[tuple, list[dict]] = defaultdict(list)
    for run in runs:
        by_setup[(run["phones"], run["kind"], run["target"], run.get("commit", "single"))].append(run)
    print("| phones | server | set-up | runs | load avg before | ack p50 / p95 / p99 / max (ms) "
          "| round result p50 / p95 / p99 / max (ms) | server CPU (s) | phones' CPU (s) | peak MB "
          "| lost / duplicated |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    order = sorted(by_setup.items(), key=lambda item: (item[0][0], item[0][1], item[0][2] != "ebbtide"))
    for (n, kind, target, commit), group in order:
        label = f"Ebbtide, {'group commit' if commit == 'group' else 'fsync per decision'}" \
            if target == "ebbtide" else "bare Flask-SocketIO"
        pick = lambda key, q, group=group: [r[key][q] for r in group]  # noqa: E731
        ack = " / ".join(cell(pick("ack", q)) for q in ("p50", "p95", "p99", "max"))
        res = " / ".join(cell(pick("round_result", q)) for q in ("p50", "p95", "p99", "max"))
        loads = cell([r["loadavg_before"][0] for r in group], 1)
        print(f"| {n} | {kind} | {label} | {len(group)} | {loads} | {ack} | {res} "
              f"| {cell([r['server_cpu_seconds'] for r in group], 2)} "
              f"| {cell([r.get('phones_cpu_seconds', float('nan')) for r in group], 1)} "
              f"| {cell([r['peak_mb'] for r in group])} "
              f"| {sum(r['lost'] for r in group)} / {sum(r['duplicated'] for r in group)} |")
    print()
    print("| phones | server | Ebbtide set-up | round result p50, x bare | p99, x bare | ack p99, x bare "
          "| server CPU, x bare |")
    print("| --- | --- | --- | --- | --- | --- | --- |")
    for (n, kind, target, commit), group in sorted(by_setup.items()):
        bare = by_setup.get((n, kind, "bare", "single"))
        if target != "ebbtide" or not bare:
            continue
        ratio = lambda key, q, group=group, bare=bare: statistics.median(  # noqa: E731
            r[key][q] for r in group) / statistics.median(r[key][q] for r in bare)
        cpu = statistics.median(r["server_cpu_seconds"] for r in group) / statistics.median(
            r["server_cpu_seconds"] for r in bare)
        print(f"| {n} | {kind} | {commit} commit | {ratio('round_result', 'p50'):.2f} "
              f"| {ratio('round_result', 'p99'):.2f} | {ratio('ack', 'p99'):.2f} | {cpu:.2f} |")


if __name__ == "__main__":
    main(sys.argv[1])
