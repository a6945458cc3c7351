"""A plain install and a built wheel serve the demo from outside the checkout.

Each case makes a fresh virtual environment, installs Ebbtide into it (not editable),
starts ``ebbtide demo`` from an empty working directory and fetches the console, the
seat cards, a phone page and its static files. The environment sees the machine's
site-packages for the third-party dependencies only (installing numpy, pandas and the
rest afresh would take minutes and test pip, not us); the test checks that the Ebbtide
code that answered is the copy inside the new environment.
"""

from __future__ import annotations

import os
import queue
import re
import shutil
import subprocess
import sys
import threading
from pathlib import Path

import pytest
import requests
from conftest import ROOT, WAIT_SECONDS

pytestmark = pytest.mark.slow


def _venv(where: Path) -> Path:
    subprocess.run([sys.executable, "-m", "venv", "--system-site-packages", str(where)], check=True)
    return where / "bin"


def _clean_env() -> dict[str, str]:
    env = dict(os.environ)
    env.pop("PYTHONPATH", None)
    return env


def _install(bin_dir: Path, target: str, cwd: Path) -> None:
    done = subprocess.run(
        [str(bin_dir / "python"), "-m", "pip", "install", "-q", "--no-deps", target],
        cwd=cwd, capture_output=True, text=True, env=_clean_env(), timeout=600,
    )
    assert done.returncode == 0, done.stderr[-2000:]


def _serve_demo_and_fetch(bin_dir: Path, cwd: Path) -> None:
    located = subprocess.run(
        [str(bin_dir / "python"), "-c", "import ebbtide.server, ebbtide.static as s; "
         "print(ebbtide.server.__file__); print(s.__file__)"],
        cwd=cwd, capture_output=True, text=True, env=_clean_env(), check=True,
    ).stdout.split()
    env_root = bin_dir.parent.resolve()
    for path in located:  # the installed copy answered, not the checkout
        assert Path(path).resolve().is_relative_to(env_root), path
    proc = subprocess.Popen(
        [str(bin_dir / "ebbtide"), "demo", "--host", "127.0.0.1", "--port", "0"],
        cwd=cwd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=_clean_env(),
    )
    lines: queue.Queue[str] = queue.Queue()
    threading.Thread(target=lambda: [lines.put(line) for line in proc.stdout], daemon=True).start()
    try:
        printed, url, pin = [], None, None
        while not (url and pin):
            try:
                line = lines.get(timeout=WAIT_SECONDS * 3)
            except queue.Empty:
                raise AssertionError(f"demo printed {printed}; stderr {proc.stderr.read()}") from None
            printed.append(line)
            if found := re.search(r"console:\s+(http://[\d.]+:\d+)/console", line):
                url = found.group(1)
            if found := re.search(r"console PIN:\s+(\d+)", line):
                pin = found.group(1)
        with requests.Session() as http:
            play = http.get(f"{url}/play", timeout=10)
            assert play.status_code == 200 and "phone.js" in play.text
            for asset in ("phone.js", "ebbtide.css", "vendor/socket.io.min.js", "console.js"):
                answer = http.get(f"{url}/static/{asset}", timeout=10)
                assert answer.status_code == 200 and len(answer.content) > 100, asset
            login = http.post(f"{url}/console/login", data={"pin": pin}, timeout=10)
            assert login.status_code == 200 and login.url.endswith("/console")
            console = http.get(f"{url}/console", timeout=10)
            assert console.status_code == 200 and "console.js" in console.text
            cards = http.get(f"{url}/console/cards", timeout=10)
            assert cards.status_code == 200 and cards.text.count("<svg") >= 4  # 2 groups x 2 seats
            spanish = http.get(f"{url}/play?lang=es", timeout=10)
            assert 'lang="es"' in spanish.text  # the compiled catalogues came along
    finally:
        proc.kill()
        proc.wait(timeout=10)
        proc.stdout.close()
        proc.stderr.close()


def test_plain_install_of_the_project_folder_serves_the_demo(tmp_path):
    bin_dir = _venv(tmp_path / "venv")
    work = tmp_path / "elsewhere"
    work.mkdir()
    _install(bin_dir, str(ROOT), work)
    _serve_demo_and_fetch(bin_dir, work)


def test_wheel_built_with_build_serves_the_demo(tmp_path):
    dist = tmp_path / "dist"
    # Built from a copy, so that no build/ folder left in the checkout can slip stale files in.
    source = tmp_path / "source"
    shutil.copytree(ROOT, source, ignore=shutil.ignore_patterns(
        ".git", "build", "dist", "*.egg-info", "test-artifacts", "__pycache__", ".*_cache",
        "session_exports"))
    built = subprocess.run([sys.executable, "-m", "build", "--wheel", "--outdir", str(dist), str(source)],
                           capture_output=True, text=True, env=_clean_env(), timeout=600)
    assert built.returncode == 0, built.stderr[-2000:]
    wheels = list(dist.glob("ebbtide-*.whl"))
    assert len(wheels) == 1
    bin_dir = _venv(tmp_path / "venv")
    work = tmp_path / "elsewhere"
    work.mkdir()
    _install(bin_dir, str(wheels[0]), work)
    _serve_demo_and_fetch(bin_dir, work)
