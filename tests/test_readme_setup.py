"""The README's set-up section says what a newcomer needs, and agrees with the code it describes."""

from __future__ import annotations

import re
import tomllib

import click
import pytest
from conftest import ROOT, ServeProcess

from ebbtide.server.cli import main

README = (ROOT / "README.md").read_text(encoding="utf-8")


def _option(command: str, name: str) -> click.Option:
    return next(p for p in main.commands[command].params if p.name == name)


def test_readme_names_the_python_the_package_requires_and_how_to_make_a_venv():
    needed = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["requires-python"]
    version = re.fullmatch(r">=(\d+\.\d+)", needed).group(1)
    assert f"Python {version} or newer" in README
    assert "python3 -m venv .venv" in README


def test_readme_gives_the_demo_address_as_the_cli_defaults_are():
    assert _option("demo", "host").default == "0.0.0.0" and "all network interfaces" in README
    port = _option("demo", "port").default
    assert f"port {port}" in README and "--host" in README and "--port" in README
    assert "--db FILE" in README and _option("demo", "db_path") is not None


def test_readme_says_chromium_is_for_the_tests_only_and_no_longer_promises_card_links():
    assert "Chromium is needed only for the tests" in README
    assert "open each card's link" not in README  # the seat cards carry QR codes, not links
    assert "open in a new\ntab" in README or "open in a new tab" in README


def test_test_script_waits_for_the_package_lock():
    script = (ROOT / "scripts" / "test.sh").read_text()
    assert "DPkg::Lock::Timeout=600" in script
    assert script.count("${apt_wait[@]}") == 2  # both the update and the install wait


@pytest.mark.slow
def test_demo_on_the_same_db_resumes_the_same_session(tmp_path):
    db = tmp_path / "demo.db"
    first = ServeProcess("demo", "--db", str(db))
    try:
        started = re.search(r"new session (\S+)", "".join(first.printed)).group(1)
    finally:
        first.kill()
    again = ServeProcess("demo", "--db", str(db))
    try:
        assert f"resumed session {started}" in "".join(again.printed)
    finally:
        again.kill()
