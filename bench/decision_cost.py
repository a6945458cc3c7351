"""CPU per decision on the live path, in one process, for a session of 2 to 200 groups.

Every phone is a Flask-SocketIO test client (no network, no other process), so what is
timed is only the server's own work for one ``harvest``: the checks, the store (group commit
into a real SQLite file), the fold, the phone snapshots and the console refresh. Each
round, every seat of every group decides once, group by group; the figure is CPU seconds
(``time.process_time``) per decision, so that a session of 200 groups can be compared with
one of 2: one decision should cost the same in both.

    python -m bench.decision_cost --groups 2 20 200 --rounds 4
    python -m bench.decision_cost --groups 120 --rounds 2 --profile decision.prof

Figures: docs/performance.md.
"""

from __future__ import annotations

import argparse
import cProfile
import statistics
import tempfile
import time
from pathlib import Path

from bench.load_study import SEATS, study_text
from ebbtide.game_logic.study import parse_study
from ebbtide.server import create_app
from ebbtide.server.app import socketio


def play(groups: int, rounds: int, profile: Path | None) -> list[float]:
    """CPU seconds per decision, one figure per round (the first round warms caches)."""
    with tempfile.TemporaryDirectory() as folder:
        study = parse_study(study_text(groups, rounds + 1))
        app = create_app({"EBBTIDE_DB": str(Path(folder) / "bench.db"), "EBBTIDE_STUDY": study,
                          "EBBTIDE_SEED": 5, "EBBTIDE_PIN": "2468"})
        registry = app.extensions["ebbtide"]
        live = registry.current
        phones = {}
        for key in live.keys:
            phones[(key.group, key.seat)] = socketio.test_client(
                app, auth={"secret": key.secret, "device": f"device-{key.group}-{key.seat}"})
        live.submit("session_started", {})
        per_round = []
        profiler = cProfile.Profile(time.process_time) if profile else None  # CPU, not waits
        for round_number in range(1, rounds + 1):
            if profiler and round_number == 2:
                profiler.enable()
            start = time.process_time()
            for (group, seat), phone in phones.items():
                decision = {"decision_id": f"decision-{round_number}-{group}-{seat}", "block": 1,
                            "round": round_number, "harvest": 1}
                ack = phone.emit("harvest", decision, callback=True)
                if not ack or not ack.get("ok"):
                    raise SystemExit(f"decision refused: {ack}")
            per_round.append((time.process_time() - start) / len(phones))
            for phone in phones.values():
                phone.get_received()  # what was sent is not kept between rounds
        if profiler:
            profiler.disable()
            profiler.dump_stats(profile)
        registry.store.close()
        return per_round


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--groups", type=int, nargs="+", default=[2, 20, 200])
    parser.add_argument("--rounds", type=int, default=4)
    parser.add_argument("--profile", type=Path, default=None, help="cProfile of rounds 2.. (last group size)")
    args = parser.parse_args()
    for groups in args.groups:
        per_round = play(groups, args.rounds, args.profile)
        later = per_round[1:] or per_round
        print(f"{groups:4d} groups x {SEATS} seats: CPU per decision median "
              f"{statistics.median(later) * 1e3:.2f} ms (rounds 2-{args.rounds}: "
              f"{', '.join(f'{t * 1e3:.2f}' for t in later)}; first round {per_round[0] * 1e3:.2f} ms)")


if __name__ == "__main__":
    main()
