"""Shared fixtures: a real server on loopback, real Socket.IO phones and a console."""

from __future__ import annotations

import functools
import json
import queue
import re
import signal
import subprocess
import sys
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path

import pytest
import requests
import socketio

from ebbtide.game_logic.study import Study, load_study, parse_study
from ebbtide.server import create_app
from ebbtide.server.serving import build_server

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "examples" / "brackwater-demo.toml"
WAIT_SECONDS = 20.0  # bounded waits; generous because CI machines are shared and noisy


@pytest.fixture
def demo_study() -> Study:
    return load_study(DEMO)


def study_with(**replacements: str) -> Study:
    """The demo study with some of its lines replaced (``"old line": "new line"``)."""
    text = DEMO.read_text(encoding="utf-8")
    for old, new in replacements.items():
        assert old in text, old
        text = text.replace(old, new)
    return parse_study(text)


def wait_until(predicate, what: str, timeout: float = WAIT_SECONDS, step: float = 0.02):
    """Poll ``predicate`` (bounded in time) until it returns something truthy."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        value = predicate()
        if value:
            return value
        time.sleep(step)
    raise AssertionError(f"timed out after {timeout} s waiting for {what}")


@dataclass
class Phone:
    """A real Socket.IO client holding one seat; keeps every message it received."""

    client: socketio.Client
    received: list[tuple[str, object]] = field(default_factory=list)

    @property
    def snapshots(self) -> list[dict]:
        return [data for name, data in self.received if name == "snapshot"]

    def latest(self) -> dict:
        return wait_until(lambda: self.snapshots and self.snapshots[-1], "a snapshot")

    def wait_for(self, predicate, what: str) -> dict:
        return wait_until(lambda: next((s for s in reversed(self.snapshots) if predicate(s)), None), what)

    def harvest(self, decision_id: str, block: int, round_number: int, harvest: int) -> dict:
        return self.client.call(
            "harvest",
            {"decision_id": decision_id, "block": block, "round": round_number, "harvest": harvest},
            timeout=WAIT_SECONDS,
        )

    def wire_text(self) -> str:
        """Everything this phone received, as JSON text (to search for leaks)."""
        return json.dumps(self.received, sort_keys=True)

    def close(self) -> None:
        self.client.disconnect()


def connect_phone(url: str, secret: str, device: str = "test-device-1", agent: str = "phone",
                  rehearsal: str | None = None) -> Phone:
    client = socketio.Client(reconnection=False)
    phone = Phone(client)
    client.on("*", lambda event, data=None: phone.received.append((event, data)))
    auth = {"secret": secret, "device": device, "agent": agent}
    if rehearsal:
        auth["rehearsal"] = rehearsal  # the bots' credential (ebbtide rehearse)
    client.connect(url, auth=auth,
                   transports=["websocket"], wait_timeout=WAIT_SECONDS)
    return phone


@dataclass
class Console:
    client: socketio.Client
    states: list[dict] = field(default_factory=list)
    problems: list[dict] = field(default_factory=list)

    def act(self, event: str, body: dict | None = None) -> dict:
        return self.client.call(event, body or {}, timeout=WAIT_SECONDS)

    def close(self) -> None:
        self.client.disconnect()


def console_login(url: str, pin: str) -> requests.Session:
    """A logged-in console browser; ``http.form_token`` is the hidden field its forms send."""
    http = requests.Session()
    response = http.post(f"{url}/console/login", data={"pin": pin}, allow_redirects=False, timeout=5)
    assert response.status_code == 303, response.text
    page = http.get(f"{url}/console", timeout=5).text
    found = re.search(r'name="form_token" value="([^"]+)"', page)
    assert found, "the console page carries no form token"
    http.form_token = found.group(1)
    return http


def connect_every_seat(server: LiveServer) -> dict[tuple[int, int], Phone]:
    """One phone per seat card of a running server, keyed by (group, seat), 0-based."""
    return {(k.group, k.seat): connect_phone(server.url, k.secret, device=f"device-{k.group}-{k.seat}")
            for k in server.keys}


def connect_console(url: str, pin: str) -> Console:
    http = console_login(url, pin)
    cookie = "; ".join(f"{k}={v}" for k, v in http.cookies.items())
    client = socketio.Client(reconnection=False)
    console = Console(client)
    client.on("console_state", console.states.append)
    client.on("problem", console.problems.append)
    client.connect(url, auth={"role": "console"}, headers={"Cookie": cookie},
                   transports=["websocket"], wait_timeout=WAIT_SECONDS)
    return console


@dataclass
class LiveServer:
    url: str
    app: object
    pin: str
    seed: int
    db_path: Path

    @property
    def live(self):
        return self.app.extensions["ebbtide"].current

    @property
    def keys(self):
        return self.live.keys

    def key(self, group: int, seat: int):
        return next(k for k in self.keys if (k.group, k.seat) == (group, seat))


@pytest.fixture
def start_server(tmp_path):
    """Factory: serve a study on 127.0.0.1 (free port) in a thread; stopped after the test."""
    running = []

    def start(study: Study, seed: int = 20240611, pin: str = "4321") -> LiveServer:
        db_path = tmp_path / "session.db"
        app = create_app({"EBBTIDE_DB": str(db_path), "EBBTIDE_STUDY": study,
                          "EBBTIDE_SEED": seed, "EBBTIDE_PIN": pin})
        server = build_server(app, "127.0.0.1", 0)
        thread = threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.05}, daemon=True)
        thread.start()
        url = f"http://127.0.0.1:{server.server_port}"
        app.config["EBBTIDE_PUBLIC_URL"] = url
        running.append((server, thread, app))
        return LiveServer(url, app, pin, seed, db_path)

    yield start
    for server, thread, app in running:
        server.shutdown()
        server.server_close()
        thread.join(timeout=5)
        app.extensions["ebbtide"].store.close()


def _answers(url: str) -> bool:
    return requests.get(url, timeout=2).ok


class ServeProcess:
    """`python -m server.cli serve` on 127.0.0.1 with a port the OS picks; bounded waits."""

    def __init__(self, *args: str):
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "ebbtide.server.cli", *args, "--host", "127.0.0.1", "--port", "0"],
            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        )
        self.lines: queue.Queue[str] = queue.Queue()
        self.errors: list[str] = []  # its stderr, read all along so a full pipe never blocks it
        self._pumps = [threading.Thread(target=self._pump, daemon=True),
                       threading.Thread(target=self._pump_errors, daemon=True)]
        for pump in self._pumps:
            pump.start()
        self.printed = []
        self.url = self._wait_for_address()

    def _pump(self) -> None:
        for line in self.proc.stdout:
            self.lines.put(line)

    def _pump_errors(self) -> None:
        for line in self.proc.stderr:
            self.errors.append(line)

    @property
    def stderr(self) -> str:
        return "".join(self.errors)

    def assert_no_traceback(self) -> None:
        """A traceback anywhere in the server's stderr is a defect, even if every client was answered."""
        assert "Traceback" not in self.stderr, self.stderr[-4000:]

    def served_by(self) -> str:
        """Which server answers (``/healthz`` names it): gevent's, the production one, or threads."""
        return requests.get(f"{self.url}/healthz", timeout=5).json()["server"]

    def _wait_for_address(self) -> str:
        url = None
        for _ in range(50):
            try:
                line = self.lines.get(timeout=30)
            except queue.Empty:
                break
            self.printed.append(line)
            found = re.search(r"console:\s+(http://[\d.]+:\d+)/console", line)
            url = found.group(1) if found else url
            if url and line.startswith("Stop with"):
                wait_until(functools.partial(_answers, f"{url}/healthz"), "the server to answer")
                return url
        self.kill()
        raise AssertionError(f"serve printed no address: {self.printed} {self.stderr}")

    def kill(self) -> None:
        """Stop the way a crash or a pulled plug would: no clean shutdown."""
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGKILL)
        self.proc.wait(timeout=10)
        for pump in self._pumps:  # the pipes end with the process: read what is left
            pump.join(timeout=5)
        self.proc.stdout.close()
        self.proc.stderr.close()


CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
]
ARTIFACTS = ROOT / "test-artifacts"


@pytest.fixture(scope="session")
def browser():
    """Debian's headless Chromium through Playwright; never downloads a browser."""
    if not CHROMIUM.exists():
        pytest.fail(f"browser tests need Debian's chromium at {CHROMIUM}: run 'apt-get install chromium' "
                    "(scripts/test.sh does it)")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        chromium = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        yield chromium
        chromium.close()


@pytest.fixture
def phone_page(browser):
    """A fresh browser context at a small phone's size (360 x 740 CSS pixels)."""
    context = browser.new_context(viewport={"width": 360, "height": 740}, device_scale_factor=2,
                                  is_mobile=True, has_touch=True)
    yield context
    context.close()
