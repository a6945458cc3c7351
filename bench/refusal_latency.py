"""How long a phone waits for an answer: a refused message versus a plain request, on loopback.

A refusal is two frames (the ``problem`` event, then the acknowledgement). Without
``TCP_NODELAY`` the second small frame waits for the client's delayed ACK (about 40 ms
on Linux); ``server/serving.py`` sets it. Serves a small study in this process on
127.0.0.1 (free port), connects one real Socket.IO phone and times N calls of each kind.

    python bench/refusal_latency.py --calls 300

Figures: docs/benchmarks-server.md.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import threading
import time
from pathlib import Path

import socketio

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from studies import make_study  # noqa: E402

from ebbtide.server import create_app  # noqa: E402
from ebbtide.server.serving import build_server  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--calls", type=int, default=300)
    args = parser.parse_args()
    folder = tempfile.mkdtemp(prefix="ebbtide-bench-")
    app = create_app({"EBBTIDE_DB": f"{folder}/bench.db", "EBBTIDE_STUDY": make_study(rounds=100),
                      "EBBTIDE_SEED": 1, "EBBTIDE_PIN": "1234", "EBBTIDE_FLOOD_EVENTS": 10**6})
    server = build_server(app, "127.0.0.1", 0)
    threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.05}, daemon=True).start()
    url = f"http://127.0.0.1:{server.server_port}"
    key = app.extensions["ebbtide"].current.keys[0]
    client = socketio.Client(reconnection=False)
    client.connect(url, auth={"secret": key.secret, "device": "bench-device"}, transports=["websocket"])
    try:
        for label, event, body in [("plain request (snapshot_please)", "snapshot_please", {}),
                                   ("refused harvest (bad shape)", "harvest", {"nonsense": 1}),
                                   ("unknown event", "no_such_event", {})]:
            times = []
            for _ in range(args.calls):
                started = time.perf_counter()
                client.call(event, body, timeout=10)
                times.append((time.perf_counter() - started) * 1000)
            times.sort()
            p95 = times[int(0.95 * len(times)) - 1]
            print(f"{label:34s} median {statistics.median(times):6.2f} ms  p95 {p95:6.2f} ms  "
                  f"max {times[-1]:6.2f} ms  ({args.calls} calls)")
    finally:
        client.disconnect()
        server.shutdown()
        app.extensions["ebbtide"].store.close()


if __name__ == "__main__":
    main()
