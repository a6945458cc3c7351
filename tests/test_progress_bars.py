"""Long commands show a progress bar on a terminal and stay quiet when their output is piped.

The terminal is a real pseudo-terminal (the standard library's ``pty``), so tqdm
decides exactly as it would for a person at a console.
"""

from __future__ import annotations

import fcntl
import os
import pty
import re
import struct
import subprocess
import sys
import termios

import pytest
from _analysis_exports import EXAMPLES, ROOT, pilot_export

from ebbtide.game_logic.study import load_study
from ebbtide.server.registry import Registry
from ebbtide.server.store.log import Store

# tqdm draws "NN%|" and a rate such as "3.2step/s" or "?step/s" (common practice, no source).
BAR = re.compile(r"\d+%\|")


def _on_a_terminal(args: list[str]) -> tuple[int, str]:
    """Run the command with standard error on a pseudo-terminal; return its exit code and what it drew."""
    leader, follower = pty.openpty()
    # A terminal of 100 columns: a fresh pseudo-terminal has none, and tqdm would draw an empty bar.
    fcntl.ioctl(follower, termios.TIOCSWINSZ, struct.pack("HHHH", 30, 100, 0, 0))
    process = subprocess.Popen([sys.executable, "-m", "ebbtide.server.cli", *args], cwd=ROOT,
                               stdout=subprocess.DEVNULL, stderr=follower, stdin=subprocess.DEVNULL)
    os.close(follower)
    chunks = []
    while True:
        try:
            chunk = os.read(leader, 65536)
        except OSError:  # the pseudo-terminal closes when the command exits (EIO on Linux)
            break
        if not chunk:
            break
        chunks.append(chunk)
    code = process.wait(timeout=300)
    os.close(leader)
    return code, b"".join(chunks).decode("utf-8", "replace")


def _piped(args: list[str]) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "ebbtide.server.cli", *args], cwd=ROOT, capture_output=True,
                          text=True, timeout=300)


def _session_database(path):
    """A real session database holding one stored (not yet started) session of the demo study."""
    with Store(path) as store:
        Registry(store).create(load_study(EXAMPLES / "brackwater-demo.toml"), seed=3, pin="4821")
    return path


@pytest.mark.parametrize("command", ["pilot", "pool", "report", "export"])
def test_a_bar_on_a_terminal_and_silence_when_piped(tmp_path, command):
    folder = pilot_export("within-subject.toml", 8, 4, "conditional")
    other = pilot_export("within-subject.toml", 8, 5, "conditional")
    arguments = {
        "pilot": lambda out: ["pilot", str(EXAMPLES / "within-subject.toml"), "--groups", "20", "--out", out],
        "pool": lambda out: ["pool", str(folder), str(other), "--out", out],
        "report": lambda out: ["report", str(folder), "--out", out + ".html"],
        "export": lambda out: ["export", str(_session_database(tmp_path / "s.db")), "--out", out],
    }[command]
    code, drawn = _on_a_terminal(arguments(str(tmp_path / "on-terminal")))
    assert code == 0, drawn
    assert BAR.search(drawn) and command in drawn
    piped = _piped(arguments(str(tmp_path / "piped")))
    assert piped.returncode == 0, piped.stderr
    assert not BAR.search(piped.stderr + piped.stdout)
