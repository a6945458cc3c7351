"""What copy-on-write costs: forking a whole session state, as every accepted event does.

Builds a session of GROUPS groups of SEATS seats that has played ROUNDS rounds (every
decision with its receipt, every device claimed), then times ``SessionState.fork()``
and, for comparison, folding one harvest into the fork (each version forked from the last,
as the live server does; one round for every group, so at most groups x seats repeats).
Pure core, no server.

    python bench/session_fork.py --groups 10 --seats 4 --rounds 30 --repeat 2000

Figures: docs/benchmarks-server.md.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))

from studies import make_study  # noqa: E402

from ebbtide.game_logic.session_fold import SessionState  # noqa: E402


def played_state(groups: int, seats: int, rounds: int) -> SessionState:
    study = make_study(groups=groups, seats=seats, rounds=rounds + 1, initial=100, max_harvest=1,
                       threshold='rule = "fixed"\nvalue = 5\nrecovery_gap = 5')
    state = SessionState.new(study, 7, "bench")
    seq = 1
    state.apply("session_started", {}, None, seq)
    for g in range(groups):
        for s in range(seats):
            seq += 1
            state.apply("seat_claimed", {"group": g, "seat": s, "device": f"d-{g}-{s}"}, None, seq)
    for r in range(1, rounds + 1):
        for g in range(groups):
            for s in range(seats):
                seq += 1
                body = {"group": g, "seat": s, "block": 1, "round": r, "harvest": 1, "source": "phone"}
                state.apply("harvest_submitted", body, f"{g}-{s}-{r}", seq)
    return state


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--groups", type=int, default=10)
    parser.add_argument("--seats", type=int, default=4)
    parser.add_argument("--rounds", type=int, default=30)
    parser.add_argument("--repeat", type=int, default=2000)
    args = parser.parse_args()
    state = played_state(args.groups, args.seats, args.rounds)
    assert all(len(p.outcomes) == args.rounds for p in state.groups)
    fork_times, fold_times = [], []
    # As the live server does: each version is forked from the one published before it,
    # and one harvest is folded into it (one round more for every group, seat by seat).
    version = state
    repeats = min(args.repeat, args.groups * args.seats)
    for i in range(repeats):
        group, seat = divmod(i, args.seats)
        body = {"group": group, "seat": seat, "block": 1, "round": args.rounds + 1, "harvest": 1,
                "source": "phone"}
        start = time.perf_counter()
        draft = version.fork()
        forked = time.perf_counter()
        draft.apply("harvest_submitted", body, f"bench-{i}", 10**9 + i)
        fork_times.append(forked - start)
        fold_times.append(time.perf_counter() - forked)
        version = draft
    for name, times in (("fork", fork_times), ("fold one harvest", fold_times)):
        times.sort()
        print(f"{name}: median {statistics.median(times) * 1e6:.0f} us, "
              f"p95 {times[int(0.95 * len(times))] * 1e6:.0f} us "
              f"({args.groups} groups x {args.seats} seats, {args.rounds} rounds played, "
              f"{len(state.receipts)} receipts)")


if __name__ == "__main__":
    main()
