"""Restarting `ebbtide serve` on a real database: resume, reopen after the end, or refuse.

Never a silent new session: a new one needs --new-session.
"""

from __future__ import annotations

import hashlib
import subprocess
import sys

import pytest
import requests
from conftest import DEMO, ROOT, ServeProcess, connect_console, connect_phone, console_login

from ebbtide.server.store import Store

SEED, PIN = 4242, "97531"
pytestmark = pytest.mark.slow


def stored_sessions(db) -> list[str]:
    with Store(db) as store:
        return [record.session_id for record in store.sessions()]


def serve_refused(*args: str) -> subprocess.CompletedProcess:
    """A `serve` that must not start: it exits by itself (bounded), saying why."""
    return subprocess.run(
        [sys.executable, "-m", "ebbtide.server.cli", "serve", *args, "--host", "127.0.0.1", "--port", "0"],
        cwd=ROOT, capture_output=True, text=True, timeout=60,
    )


def test_edited_study_file_is_refused_with_both_hashes_and_the_ways_on(tmp_path):
    study_file = tmp_path / "lagoon.toml"
    study_file.write_bytes(DEMO.read_bytes())
    # SHA-256 of the file's bytes by the standard library (FIPS 180-4 via hashlib), not by Ebbtide.
    original_sha = hashlib.sha256(study_file.read_bytes()).hexdigest()
    db = tmp_path / "day.db"
    first = ServeProcess("serve", str(study_file), "--db", str(db), "--seed", str(SEED), "--pin", PIN)
    first.kill()
    [session_id] = stored_sessions(db)

    # The night before, someone "fixes" a number.
    edited = DEMO.read_text(encoding="utf-8").replace("max_harvest = 15", "max_harvest = 12")
    study_file.write_text(edited, encoding="utf-8")
    edited_sha = hashlib.sha256(study_file.read_bytes()).hexdigest()
    assert edited_sha != original_sha

    refused = serve_refused(str(study_file), "--db", str(db))
    assert refused.returncode == 2
    message = refused.stderr.strip()
    assert len(message.splitlines()) == 1 and "Traceback" not in refused.stderr
    assert original_sha in message and edited_sha in message and session_id in message
    assert "restore the study file" in message and "--new-session" in message
    assert stored_sessions(db) == [session_id]  # refused: nothing created, nothing changed

    # Way on 1: restore the file, and the stored session resumes.
    study_file.write_bytes(DEMO.read_bytes())
    resumed = ServeProcess("serve", str(study_file), "--db", str(db))
    try:
        assert any(f"resumed session {session_id}" in line for line in resumed.printed)
    finally:
        resumed.kill()

    # Way on 2: keep the edit and ask for a new session.
    study_file.write_text(edited, encoding="utf-8")
    fresh = ServeProcess("serve", str(study_file), "--db", str(db), "--new-session")
    try:
        assert any("new session" in line for line in fresh.printed)
        assert len(stored_sessions(db)) == 2
        with Store(db) as store:
            newest = store.sessions()[-1]
        assert hashlib.sha256(newest.study_text.encode("utf-8")).hexdigest() == edited_sha
    finally:
        fresh.kill()


def test_restart_after_the_end_reopens_the_ended_session(tmp_path):
    db = tmp_path / "payday.db"
    first = ServeProcess("serve", str(DEMO), "--db", str(db), "--seed", str(SEED), "--pin", PIN)
    try:
        with Store(db) as store:
            keys = store.seat_keys(store.sessions()[0].session_id)
        console = connect_console(first.url, PIN)
        assert console.act("console_start")["ok"]
        phone = connect_phone(first.url, keys[0].secret, device="device-0-0")
        assert phone.harvest("before-the-end", 1, 1, 7)["ok"]
        assert console.act("console_end")["ok"]
        phone.close()
        console.close()
    finally:
        first.kill()  # the laptop restarts during payment
    [session_id] = stored_sessions(db)

    second = ServeProcess("serve", str(DEMO), "--db", str(db))
    try:
        printed = "".join(second.printed)
        assert "reopened session, which has ended" in printed and session_id in printed
        assert "new session" not in printed and "--new-session" in printed
        assert stored_sessions(db) == [session_id]

        # The same PIN opens the console; payment sheet, debrief and its reveal are there.
        http = console_login(second.url, PIN)
        sheet = http.get(f"{second.url}/console/payments", timeout=10)
        assert sheet.status_code == 200 and keys[0].short_code in sheet.text
        assert http.get(f"{second.url}/console/debrief", timeout=10).status_code == 200
        revealed = http.post(f"{second.url}/console/debrief/reveal", data={"form_token": http.form_token},
                             allow_redirects=False, timeout=10)
        assert revealed.status_code == 303
        exported = http.get(f"{second.url}/console/export.zip", timeout=10)
        assert exported.status_code == 200 and exported.content[:2] == b"PK"  # zip magic (PKWARE APPNOTE)

        # An old seat card still joins, sees the end and its stored choice; nothing more is played.
        phone = connect_phone(second.url, keys[0].secret, device="device-0-0")
        snap = phone.latest()
        assert snap["status"] == "ended"
        late = phone.harvest("after-the-end", 1, 2, 3)
        assert late["ok"] is False and late["code"] == "session_over"
        card = connect_phone(second.url, keys[1].secret, device="a-new-device")
        assert card.latest()["status"] == "ended"
        phone.close()
        card.close()
        assert requests.get(f"{second.url}/healthz", timeout=5).json()["session_id"] == session_id
    finally:
        second.kill()

    with Store(db) as store:
        events = store.events(session_id)
    assert [e.decision_id for e in events if e.kind == "harvest_submitted"] == ["before-the-end"]
    assert [e.kind for e in events].count("debrief_revealed") == 1

    third = ServeProcess("serve", str(DEMO), "--db", str(db), "--new-session")
    try:
        assert any("new session" in line for line in third.printed)
        assert len(stored_sessions(db)) == 2 and stored_sessions(db)[0] == session_id
    finally:
        third.kill()
