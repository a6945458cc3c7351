"""How the threading server copes with a full village hall: N phones on loopback.

Starts `ebbtide serve` as its own process (so the phones' client threads do not
share its interpreter), connects N real Socket.IO clients, starts the session
and plays R rounds in which every phone submits at once. Prints connect time,
acknowledgement latency (p50 / p95 / max), time for all groups to resolve a
round, and the server's peak memory.

    python bench/server_phones.py --phones 40 --rounds 5 [--transport websocket|polling]

Figures and the machine they were taken on: docs/benchmarks-server.md.
"""

from __future__ import annotations

import argparse
import re
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import requests
import socketio

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from ebbtide.server.store import Store  # noqa: E402

SEATS = 4


def study_text(groups: int) -> str:
    text = (ROOT / "examples" / "brackwater-demo.toml").read_text(encoding="utf-8")
    text = text.replace("count = 2", f"count = {groups}")
    text = text.replace("seats_per_group = 2", f"seats_per_group = {SEATS}")
    return text.replace("max_harvest = 15", "max_harvest = 5")


def start_server(study: Path, db: Path) -> tuple[subprocess.Popen, str]:
    proc = subprocess.Popen(
        [sys.executable, "-m", "ebbtide.server.cli", "serve", str(study), "--db", str(db),
         "--host", "127.0.0.1", "--port", "0", "--pin", "9999", "--seed", "3"],
        cwd=ROOT, stdout=subprocess.PIPE, text=True,
    )
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        line = proc.stdout.readline()
        found = re.search(r"console:\s+(http://[\d.:]+)/console", line)
        if found:
            return proc, found.group(1)
    proc.kill()
    raise SystemExit("the server did not start")


def peak_rss_mb(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--phones", type=int, default=40)
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--transport", choices=["websocket", "polling"], default="websocket")
    args = parser.parse_args()
    groups = args.phones // SEATS
    with tempfile.TemporaryDirectory() as tmp:
        study = Path(tmp) / "bench.toml"
        study.write_text(study_text(groups), encoding="utf-8")
        db = Path(tmp) / "bench.db"
        proc, url = start_server(study, db)
        try:
            run(url, db, groups, args)
        finally:
            rss = peak_rss_mb(proc.pid)
            proc.kill()
            proc.wait(timeout=10)
            print(f"server peak memory (VmHWM): {rss:.0f} MB")


def run(url: str, db: Path, groups: int, args) -> None:
    with Store(db) as store:
        keys = store.seat_keys(store.sessions()[0].session_id)
    snapshots: dict[tuple[int, int], list[dict]] = {(k.group, k.seat): [] for k in keys}
    clients = {}
    began = time.perf_counter()
    for k in keys:
        client = socketio.Client(reconnection=False)
        client.on("snapshot", snapshots[(k.group, k.seat)].append)
        client.connect(url, auth={"secret": k.secret, "device": f"bench-{k.group}-{k.seat}"},
                       transports=[args.transport], wait_timeout=10)
        clients[(k.group, k.seat)] = client
    connect_s = time.perf_counter() - began
    http = requests.Session()
    http.post(f"{url}/console/login", data={"pin": "9999"}, timeout=5)
    console = socketio.Client(reconnection=False)
    console.connect(url, auth={"role": "console"}, headers={"Cookie": f"session={http.cookies['session']}"},
                    transports=["websocket"], wait_timeout=10)
    console.call("console_start", {}, timeout=10)
    latencies: list[float] = []
    lock = threading.Lock()
    round_times = []

    def submit(seat_key, round_number):
        started = time.perf_counter()
        decision = {"decision_id": f"bench-{seat_key[0]}-{seat_key[1]}-{round_number}",
                    "block": 1, "round": round_number, "harvest": 2}
        ack = clients[seat_key].call("harvest", decision, timeout=30)
        took = time.perf_counter() - started
        assert ack["ok"], ack
        with lock:
            latencies.append(took)

    with ThreadPoolExecutor(max_workers=len(clients)) as pool:
        for r in range(1, args.rounds + 1):
            started = time.perf_counter()
            list(pool.map(lambda key, r=r: submit(key, r), clients))
            deadline = time.monotonic() + 30
            while time.monotonic() < deadline:
                seen = [s[-1]["view"].get("last_round", {}).get("round") if s else None
                        for s in snapshots.values()]
                if all(n == r for n in seen):
                    break
                time.sleep(0.002)
            round_times.append(time.perf_counter() - started)
    for client in [*clients.values(), console]:
        client.disconnect()
    q = statistics.quantiles(latencies, n=20)
    print(f"{len(clients)} phones ({groups} groups of {SEATS}), transport {args.transport}, "
          f"{args.rounds} rounds")
    print(f"connect all phones: {connect_s:.2f} s")
    print(f"ack latency: p50 {statistics.median(latencies) * 1000:.1f} ms, p95 {q[18] * 1000:.1f} ms, "
          f"max {max(latencies) * 1000:.1f} ms ({len(latencies)} decisions)")
    print(f"round (all submit at once -> every phone has the result): median "
          f"{statistics.median(round_times) * 1000:.0f} ms, max {max(round_times) * 1000:.0f} ms")


if __name__ == "__main__":
    main()
