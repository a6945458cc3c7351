"""Live load: N phones as real Socket.IO clients on loopback, Ebbtide beside the bare stack.

For each N, each repeat and each server kind, this starts ``ebbtide serve`` (and
bench/bare_stack.py, the same load on a Flask-SocketIO app doing only the minimum) as its
own process, connects N phones in groups of 5, and plays R rounds in which every phone
decides at the same moment. It reports, per run:

- acknowledgement latency (``harvest`` sent -> its acknowledgement back);
- round-result latency (a group's last decision sent -> every phone of that group holds the
  round's result), p50 / p95 / p99 / max;
- decisions lost (acknowledged but not stored) or duplicated (stored twice), from the database;
- server CPU seconds during the rounds, and the server's peak memory (VmHWM, Linux);
- the machine's load average before the run (other people's work shares it).

    python bench/live_load.py --phones 40 200 --rounds 5 --repeats 3 [--kinds gevent threading]
        [--targets ebbtide bare] [--json results.jsonl]

The phones live in this one process as gevent greenlets (monkey-patched below), so a
thousand of them need no thousand OS threads. Figures: docs/performance.md.
"""

from __future__ import annotations

from gevent import monkey

monkey.patch_all()

import argparse  # noqa: E402
import json  # noqa: E402
import logging  # noqa: E402
import os  # noqa: E402
import re  # noqa: E402
import resource  # noqa: E402
import sqlite3  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from dataclasses import dataclass, field  # noqa: E402
from pathlib import Path  # noqa: E402

import gevent  # noqa: E402
import gevent.pool  # noqa: E402
import requests  # noqa: E402
import socketio  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # run as a script from a clone
from bench.load_study import SEATS, study_text  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
CONNECTS_AT_ONCE = 50  # phones joining together; a hall fills over minutes, not in one instant
WAIT = 120.0


def raise_open_file_limit(wanted: int) -> int:
    """Hundreds of sockets need hundreds of descriptors, here and in the server (inherited)."""
    soft, hard = resource.getrlimit(resource.RLIMIT_NOFILE)
    target = hard if hard != resource.RLIM_INFINITY else max(wanted, soft)
    if soft < target:
        resource.setrlimit(resource.RLIMIT_NOFILE, (target, hard))
    return resource.getrlimit(resource.RLIMIT_NOFILE)[0]


def cpu_seconds(pid: int) -> float:
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def peak_rss_mb(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def start(cmd: list[str], kind: str, pattern: str, commit: str = "group") -> tuple[subprocess.Popen, str]:
    env = {**os.environ, "EBBTIDE_SERVER": kind, "PYTHONUNBUFFERED": "1",
           "EBBTIDE_GROUP_COMMIT": "1" if commit == "group" else "0"}
    errors = open(os.environ.get("BENCH_SERVER_LOG", os.devnull), "a")  # noqa: SIM115 - lives with proc
    proc = subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.PIPE, stderr=errors, text=True, env=env)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        line = proc.stdout.readline()
        found = re.search(pattern, line)
        if found:
            gevent.spawn(proc.stdout.read)  # keep draining, never block the server on a full pipe
            return proc, found.group(1)
        if not line and proc.poll() is not None:
            break
    proc.kill()
    raise SystemExit(f"{cmd[:4]} did not start")


def quantile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, int(q * len(ordered)))]


def summary(values: list[float]) -> dict[str, float]:
    if not values:
        return {"p50": float("nan"), "p95": float("nan"), "p99": float("nan"), "max": float("nan")}
    ms = [v * 1000 for v in values]
    return {"p50": statistics.median(ms), "p95": quantile(ms, 0.95), "p99": quantile(ms, 0.99),
            "max": max(ms)}


@dataclass
class Phone:
    group: int
    seat: int
    client: socketio.Client
    results: dict[int, float] = field(default_factory=dict)  # round -> when the result arrived
    sent: dict[int, float] = field(default_factory=dict)


def connect_all(phones: list[Phone], url: str, auth_of) -> float:
    began = time.perf_counter()
    pool = gevent.pool.Pool(CONNECTS_AT_ONCE)
    def join(phone: Phone) -> None:
        try:
            phone.client.connect(url, auth=auth_of(phone), transports=["websocket"], wait_timeout=WAIT)
        except Exception:  # noqa: S110 - counted afterwards as phones not connected
            pass

    for phone in phones:
        pool.spawn(join, phone)
    pool.join()
    return time.perf_counter() - began


PROFILE_DIR: Path | None = None  # --profile: py-spy samples the server while it plays


def profiler(server_pid: int, name: str) -> subprocess.Popen | None:
    if PROFILE_DIR is None:
        return None
    PROFILE_DIR.mkdir(parents=True, exist_ok=True)
    return subprocess.Popen(["py-spy", "record", "--pid", str(server_pid), "--format", "raw", "--rate", "200",
                             "--output", str(PROFILE_DIR / f"{name}.txt")],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


def play(phones: list[Phone], rounds: int, server_pid: int, name: str = "") -> dict:
    sampling = profiler(server_pid, name)
    acks: list[float] = []
    refused: list[dict] = []
    failed: list[str] = []  # no acknowledgement: the phone lost its connection, or the call timed out

    def decide(phone: Phone, r: int) -> None:
        decision = {"decision_id": f"decision-{phone.group}-{phone.seat}-{r}", "block": 1, "round": r,
                    "harvest": 1 + (phone.seat % 3)}
        phone.sent[r] = time.perf_counter()
        try:
            ack = phone.client.call("harvest", decision, timeout=WAIT)
        except Exception as exc:  # counted and reported: this is where a set-up breaks
            failed.append(type(exc).__name__)
            return
        acks.append(time.perf_counter() - phone.sent[r])
        if not ack.get("ok"):
            refused.append(ack)

    round_results: list[float] = []
    without_result = 0
    cpu_before = cpu_seconds(server_pid)
    own_before = resource.getrusage(resource.RUSAGE_SELF)
    began = time.perf_counter()
    for r in range(1, rounds + 1):
        jobs = [gevent.spawn(decide, phone, r) for phone in phones]  # every phone at once
        gevent.joinall(jobs, timeout=WAIT, raise_error=True)
        deadline = time.monotonic() + (10 if failed else WAIT)
        while time.monotonic() < deadline and not all(r in p.results for p in phones):
            gevent.sleep(0.005)
        without_result += sum(r not in p.results for p in phones)
        by_group: dict[int, list[Phone]] = {}
        for phone in phones:
            by_group.setdefault(phone.group, []).append(phone)
        for members in by_group.values():
            if all(r in p.results for p in members):
                last_sent = max(p.sent[r] for p in members)
                round_results.append(max(p.results[r] for p in members) - last_sent)
        if failed:
            break  # a group with a lost phone cannot finish its round; stop and report
        gevent.sleep(0.3)  # let the console refresh settle before the next round
    if sampling is not None:
        sampling.send_signal(2)  # py-spy writes its file on SIGINT
        sampling.wait(timeout=60)
    return {
        "ack": summary(acks), "round_result": summary(round_results), "refused": len(refused),
        "failed_calls": len(failed), "failure_kinds": sorted(set(failed)),
        "phone_rounds_without_result": without_result,
        "connected_at_end": sum(p.client.connected for p in phones),
        "decisions_acked": len(acks) - len(refused), "play_seconds": time.perf_counter() - began,
        "server_cpu_seconds": cpu_seconds(server_pid) - cpu_before,
        # The phones' own process shares the 2 cores: when it is busy, latencies include its queue.
        "phones_cpu_seconds": cpu_used(own_before),
    }


def cpu_used(before) -> float:
    now = resource.getrusage(resource.RUSAGE_SELF)
    return (now.ru_utime - before.ru_utime) + (now.ru_stime - before.ru_stime)


def run_ebbtide(n: int, rounds: int, kind: str, tmp: Path, commit: str) -> dict:
    study = tmp / "bench.toml"
    # One round more than played: the measured rounds are ordinary ones, not the session's end
    # (which sends every phone its final screen at once).
    study.write_text(study_text(n // SEATS, rounds + 1), encoding="utf-8")
    db = tmp / "ebbtide.db"
    proc, url = start([sys.executable, "-m", "ebbtide.server.cli", "serve", str(study), "--db", str(db),
                       "--host", "127.0.0.1", "--port", "0", "--pin", "9999", "--seed", "3"],
                      kind, r"console:\s+(http://[\d.:]+)/console", commit)
    try:
        keys = sqlite3.connect(db).execute(
            "SELECT group_index, seat_index, secret FROM seat_keys ORDER BY group_index, seat_index"
        ).fetchall()
        phones = []
        secrets = {}
        for group, seat, secret in keys:
            phone = Phone(group, seat, socketio.Client(reconnection=False))
            secrets[(group, seat)] = secret

            def on_snapshot(snapshot, phone=phone):
                last = (snapshot.get("view") or {}).get("last_round") or {}
                if last.get("round") and last["round"] not in phone.results:
                    phone.results[last["round"]] = time.perf_counter()

            phone.client.on("snapshot", on_snapshot)
            phones.append(phone)
        connect_s = connect_all(phones, url, lambda p: {"secret": secrets[(p.group, p.seat)],
                                                         "device": f"bench-{p.group}-{p.seat}"})
        http = requests.Session()
        http.post(f"{url}/console/login", data={"pin": "9999"}, timeout=30)
        console = socketio.Client(reconnection=False)
        console_states = []
        console.on("console_state", lambda s: console_states.append(time.perf_counter()))
        console.connect(url, auth={"role": "console"}, transports=["websocket"], wait_timeout=WAIT,
                        headers={"Cookie": f"session={http.cookies['session']}"})
        console.call("console_start", {}, timeout=WAIT)
        before = len(console_states)
        figures = play(phones, rounds, proc.pid, f"ebbtide-{kind}-{commit}-{n}")
        figures["console_updates"] = len(console_states) - before
        figures["connect_seconds"] = connect_s
        figures["phones_connected"] = sum(p.client.connected for p in phones)
        for client in [*(p.client for p in phones), console]:
            client.disconnect()
        figures["peak_mb"] = peak_rss_mb(proc.pid)
    finally:
        proc.kill()
        proc.wait(timeout=30)
    rows = sqlite3.connect(db).execute(
        "SELECT json_extract(body, '$.group'), json_extract(body, '$.seat'), json_extract(body, '$.round'),"
        " count(*) FROM events WHERE kind = 'harvest_submitted' GROUP BY 1, 2, 3").fetchall()
    figures.update(integrity(rows, n, rounds, figures["decisions_acked"]))
    return figures


def run_bare(n: int, rounds: int, kind: str, tmp: Path, commit: str) -> dict:
    db = tmp / "bare.db"
    proc, url = start([sys.executable, str(ROOT / "bench" / "bare_stack.py"), "--db", str(db),
                       "--seats", str(SEATS)], kind, r"listening on (http://[\d.:]+)")
    try:
        phones = []
        for g in range(n // SEATS):
            for s in range(SEATS):
                phone = Phone(g, s, socketio.Client(reconnection=False))

                def on_result(result, phone=phone):
                    phone.results.setdefault(result["round"], time.perf_counter())

                phone.client.on("result", on_result)
                phones.append(phone)
        connect_s = connect_all(phones, url, lambda p: {"group": p.group, "seat": p.seat})
        figures = play(phones, rounds, proc.pid, f"bare-{kind}-{n}")
        figures["connect_seconds"] = connect_s
        figures["phones_connected"] = sum(p.client.connected for p in phones)
        for phone in phones:
            phone.client.disconnect()
        figures["peak_mb"] = peak_rss_mb(proc.pid)
    finally:
        proc.kill()
        proc.wait(timeout=30)
    rows = sqlite3.connect(db).execute(
        "SELECT grp, seat, round, count(*) FROM decisions GROUP BY 1, 2, 3").fetchall()
    figures.update(integrity(rows, n, rounds, figures["decisions_acked"]))
    return figures


def integrity(rows: list[tuple], n: int, rounds: int, acked: int) -> dict:
    """Every acknowledged decision stored exactly once."""
    stored = {(g, s, r): c for g, s, r, c in rows}
    expected = {(g, s, r) for g in range(n // SEATS) for s in range(SEATS) for r in range(1, rounds + 1)}
    return {
        "lost": len(expected - set(stored)) + max(0, acked - n * rounds),
        "duplicated": sum(c - 1 for c in stored.values() if c > 1),
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--phones", type=int, nargs="+", default=[40, 200])
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--kinds", nargs="+", default=["gevent"], choices=["gevent", "threading"])
    parser.add_argument("--targets", nargs="+", default=["ebbtide", "bare"], choices=["ebbtide", "bare"])
    parser.add_argument("--commits", nargs="+", default=["group"], choices=["group", "single"],
                        help="Ebbtide's commits: group commit, or one fsync per decision")
    parser.add_argument("--profile", type=Path, default=None,
                        help="folder for py-spy samples of each server while it plays")
    parser.add_argument("--json", type=Path, default=None, help="append one JSON line per run here")
    args = parser.parse_args()
    global PROFILE_DIR
    PROFILE_DIR = args.profile
    logging.getLogger("engineio.client").setLevel(logging.CRITICAL)  # one line per phone at disconnect
    limit = raise_open_file_limit(4 * max(args.phones) + 256)
    print(f"open-file limit {limit}; {os.cpu_count()} cores", flush=True)
    runners = {"ebbtide": run_ebbtide, "bare": run_bare}
    for n in args.phones:
        for repeat in range(1, args.repeats + 1):
            for kind in args.kinds:
                runs = [(t, c) for t in args.targets
                        for c in (args.commits if t == "ebbtide" else ["single"])]
                for target, commit in runs:  # interleaved, so a busy minute hits every set-up alike
                    load = os.getloadavg()
                    with tempfile.TemporaryDirectory() as tmp:
                        figures = runners[target](n, args.rounds, kind, Path(tmp), commit)
                    record = {"phones": n, "repeat": repeat, "kind": kind, "target": target, "commit": commit,
                              "rounds": args.rounds, "loadavg_before": load, **figures}
                    print(json.dumps(record), flush=True)
                    if args.json:
                        with args.json.open("a", encoding="utf-8") as out:
                            out.write(json.dumps(record) + "\n")


if __name__ == "__main__":
    main()
