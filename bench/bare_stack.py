"""The bare stack: Flask-SocketIO doing only the minimum a harvest game needs, as a yardstick.

Each phone joins its group's room; each ``harvest`` is one durable insert (SQLite, WAL,
``synchronous=FULL``, its own transaction, so one fsync per decision) and is then
acknowledged; when a group's round is complete, one ``result`` event goes to the group's
room. No rules, no replay, no snapshots, no console. bench/live_load.py runs the same load
against this and against ``ebbtide serve`` on the same server kind, so Ebbtide's figures can
be read as a multiple of what the stack itself costs.

    EBBTIDE_SERVER=gevent python bench/bare_stack.py --db /tmp/bare.db --seats 5
"""

from __future__ import annotations

import os
import sys

KIND = os.environ.get("EBBTIDE_SERVER", "gevent")
if KIND == "gevent":  # before anything else is imported, as in `ebbtide serve`
    from gevent import monkey

    monkey.patch_all()

import argparse  # noqa: E402
import sqlite3  # noqa: E402
import threading  # noqa: E402

from flask import Flask, request  # noqa: E402
from flask_socketio import SocketIO, join_room  # noqa: E402

from ebbtide.server.serving import build_server  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--db", required=True)
    parser.add_argument("--seats", type=int, default=5)
    parser.add_argument("--host", default="127.0.0.1")
    parser.add_argument("--port", type=int, default=0)
    args = parser.parse_args()

    db = sqlite3.connect(args.db, check_same_thread=False, isolation_level=None)
    db.execute("PRAGMA journal_mode = WAL")
    db.execute("PRAGMA synchronous = FULL")
    db.execute("CREATE TABLE IF NOT EXISTS decisions (grp INT, seat INT, round INT, harvest INT, "
               "decision_id TEXT UNIQUE)")
    lock = threading.Lock()
    seats_of: dict[str, tuple[int, int]] = {}
    decided: dict[tuple[int, int], int] = {}

    app = Flask(__name__)
    sio = SocketIO(app, async_mode=KIND)

    @sio.on("connect")
    def on_connect(auth):
        group, seat = int(auth["group"]), int(auth["seat"])
        seats_of[request.sid] = (group, seat)
        join_room(f"group:{group}")

    @sio.on("harvest")
    def on_harvest(msg):
        group, seat = seats_of[request.sid]
        key = (group, msg["round"])
        with lock:
            db.execute("INSERT INTO decisions VALUES (?, ?, ?, ?, ?)",
                       (group, seat, msg["round"], msg["harvest"], msg["decision_id"]))
            decided[key] = decided.get(key, 0) + 1
            complete = decided[key] == args.seats
        if complete:
            sio.emit("result", {"round": msg["round"]}, to=f"group:{group}")
        return {"ok": True}

    # The same server set-up as Ebbtide's (TCP_NODELAY, gevent or threads), so the ratio
    # measures the application, not the server.
    server = build_server(app, args.host, args.port)
    port = server.server_port
    print(f"bare stack listening on http://{args.host}:{port}", flush=True)
    server.serve_forever()


if __name__ == "__main__":
    sys.exit(main())
