"""The serve, demo and export commands, run as real processes."""

from __future__ import annotations

import re
import subprocess
import sys

import pytest
import requests
from conftest import DEMO, ROOT, ServeProcess

pytestmark = pytest.mark.slow


@pytest.mark.parametrize("command", ["serve", "demo", "export"])
def test_every_new_command_has_help(command):
    done = subprocess.run([sys.executable, "-m", "ebbtide.server.cli", command, "--help"], cwd=ROOT,
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 0 and "Usage:" in done.stdout


def test_demo_prints_console_pin_and_seat_cards_and_serves_pages():
    demo = ServeProcess("demo")
    try:
        text = "".join(demo.printed)
        pin = re.search(r"console PIN:\s+(\d{6})", text).group(1)
        assert re.search(r"seat cards:\s+http://[\d.]+:\d+/console/cards", text)
        assert requests.get(f"{demo.url}/play", timeout=5).status_code == 200
        http = requests.Session()
        login = http.post(f"{demo.url}/console/login", data={"pin": pin}, timeout=5)
        cards = http.get(f"{demo.url}/console/cards", timeout=5)
        assert login.status_code == 200 and "Before you start" in login.text
        assert cards.text.count('class="seat-card"') == 4
    finally:
        demo.kill()


def test_serve_refuses_a_malformed_pin_and_says_what_is_allowed(tmp_path):
    done = subprocess.run(
        [sys.executable, "-m", "ebbtide.server.cli", "serve", "examples/brackwater-demo.toml",
         "--db", str(tmp_path / "x.db"), "--pin", "12ab"],
        cwd=ROOT, capture_output=True, text=True, timeout=60,
    )
    assert done.returncode == 2 and "allowed: 4 to 12 digits" in done.stderr
    assert not (tmp_path / "x.db").exists()


def test_export_of_a_missing_database_is_refused(tmp_path):
    done = subprocess.run(
        [sys.executable, "-m", "ebbtide.server.cli", "export", str(tmp_path / "none.db"),
         "--out", str(tmp_path)],
        cwd=ROOT, capture_output=True, text=True, timeout=60,
    )
    assert done.returncode == 2 and "does not exist" in done.stderr


@pytest.mark.parametrize("command", ["serve", "rehearse", "export"])
def test_a_damaged_database_is_one_line_and_exit_2(tmp_path, command):
    # A file that is not SQLite (its first 16 bytes are not the "SQLite format 3" header).
    bad = tmp_path / "bad.db"
    bad.write_bytes(b"not a database at all")
    args = {
        "serve": ["serve", str(DEMO), "--db", str(bad), "--port", "0"],
        "rehearse": ["rehearse", str(bad), "--url", "http://127.0.0.1:9"],
        "export": ["export", str(bad), "--out", str(tmp_path / "out")],
    }[command]
    done = subprocess.run([sys.executable, "-m", "ebbtide.server.cli", *args], cwd=ROOT,
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 2, done.stderr
    assert "Traceback" not in done.stderr and len(done.stderr.strip().splitlines()) == 1
    assert bad.read_bytes() == b"not a database at all"  # nothing changed
