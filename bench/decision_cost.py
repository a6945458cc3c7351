"""CPU per decision on the live path, in one process, for a session of 2 to 200 groups.

Every phone is a Flask-SocketIO test client (no network, no other process), so what is
timed is only the server's own work for one ``harvest``: the checks, the store (a real SQLite
file, on /dev/shm where there is one so that the disk's fsync is not counted), the fold, the
phone snapshots and the console refresh. Each round, every seat of every group decides once,
group by group, for about ``--decisions`` decisions after a warm-up round; the figure is CPU
seconds (``time.process_time``) per decision, so that a session of 200 groups can be compared
with one of 2: one decision should cost the same in both.

    python -m bench.decision_cost --groups 2 20 200 --decisions 1000 --repeats 3
    python -m bench.decision_cost --groups 120 --repeats 1 --profile decision.prof

Figures: docs/performance.md.
"""

from __future__ import annotations

import argparse
import cProfile
import os
import statistics
import tempfile
import time
from pathlib import Path

from bench.load_study import SEATS, study_text
from ebbtide.game_logic.study import parse_study
from ebbtide.server import create_app
from ebbtide.server.app import socketio


def play(groups: int, decisions: int, profile: Path | None) -> float:
    """CPU seconds per decision over about ``decisions`` decisions, after one warm-up round."""
    rounds = min(98, max(1, -(-decisions // (groups * SEATS))))  # a block has at most 100 rounds
    # On a memory file system where there is one: the disk's fsync is the live_load benchmark's
    # business; this one counts the server's own work.
    memory = "/dev/shm" if Path("/dev/shm").is_dir() else None
    with tempfile.TemporaryDirectory(dir=memory) as folder:
        study = parse_study(study_text(groups, rounds + 2))
        app = create_app({"EBBTIDE_DB": str(Path(folder) / "bench.db"), "EBBTIDE_STUDY": study,
                          "EBBTIDE_SEED": 5, "EBBTIDE_PIN": "2468",
                          "EBBTIDE_FLOOD_EVENTS": 10**6})  # a test client decides far faster than a person
        registry = app.extensions["ebbtide"]
        live = registry.current
        phones = {}
        for key in live.keys:
            phones[(key.group, key.seat)] = socketio.test_client(
                app, auth={"secret": key.secret, "device": f"device-{key.group}-{key.seat}"})
        live.submit("session_started", {})
        profiler = cProfile.Profile(time.process_time) if profile else None  # CPU, not waits
        used = 0.0
        for round_number in range(1, rounds + 2):
            measured = round_number > 1  # the first round fills caches
            if profiler and measured:
                profiler.enable()
            start = time.process_time()
            for (group, seat), phone in phones.items():
                decision = {"decision_id": f"decision-{round_number}-{group}-{seat}", "block": 1,
                            "round": round_number, "harvest": 1}
                ack = phone.emit("harvest", decision, callback=True)
                if not ack or not ack.get("ok"):
                    raise SystemExit(f"decision refused: {ack}")
            if measured:
                used += time.process_time() - start
            if profiler:
                profiler.disable()
            for phone in phones.values():
                phone.get_received()  # what was sent is not kept between rounds
        if profiler:
            profiler.dump_stats(profile)
        registry.store.close()
        return used / (rounds * len(phones))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--groups", type=int, nargs="+", default=[2, 20, 200])
    parser.add_argument("--decisions", type=int, default=1000, help="decisions timed per run (whole rounds)")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--profile", type=Path, default=None, help="cProfile of the last run")
    args = parser.parse_args()
    for groups in args.groups:
        loads = [os.getloadavg()[0]]
        runs = [play(groups, args.decisions, args.profile) for _ in range(args.repeats)]
        loads.append(os.getloadavg()[0])
        median = statistics.median(runs)
        print(f"{groups:4d} groups x {SEATS} seats: CPU per decision median {median * 1e3:.2f} ms"
              f" (runs: {', '.join(f'{t * 1e3:.2f}' for t in runs)}; about {args.decisions} decisions each;"
              f" load1 {min(loads):.1f}-{max(loads):.1f})")


if __name__ == "__main__":
    main()
