"""The phone page keeps a choice the server could not store and sends it again, saying so on screen."""

from __future__ import annotations

import sqlite3

import pytest
from babel.support import Translations
from conftest import ARTIFACTS, ROOT, connect_console, wait_until

from ebbtide.server.store import Store
from ebbtide.server.store.log import Writer

pytestmark = pytest.mark.browser
RETRYING = "Your choice is not saved yet. It is kept on this phone and sent again in a moment."
FAILURES = 3  # answered server_error three times: resent after about 1, 2 and 4 s


def words(lang: str, text: str) -> str:
    return Translations.load(str(ROOT / "translations"), [lang]).gettext(text)


@pytest.mark.parametrize(("lang", "seat"), [("en", (0, 0)), ("es", (1, 0)), ("fr", (1, 1))])
def test_phone_retries_a_choice_the_server_could_not_store(start_server, demo_study, phone_page, monkeypatch,
                                                            lang, seat):
    real_append = Writer.append
    left = {"failures": FAILURES}

    def flaky(self, kind, body, decision_id=None):
        if kind == "harvest_submitted" and left["failures"] > 0:
            left["failures"] -= 1
            # What the standard library raises on a locked database file (Python docs, sqlite3).
            raise sqlite3.OperationalError("database is locked")
        return real_append(self, kind, body, decision_id)

    monkeypatch.setattr(Writer, "append", flaky)
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    page = phone_page.new_page()
    try:
        console.act("console_start")
        page.goto(f"{server.url}/s/{server.key(*seat).secret}?lang={lang}")
        page.locator("#chooser").wait_for(state="visible")
        page.locator("#more").tap()
        page.locator("#more").tap()
        page.locator("#confirm").tap()
        page.get_by_text(words(lang, RETRYING)).wait_for()
        assert page.locator("#problem").is_hidden()  # no raw server words, only the translated status
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"phone-retrying-{lang}-360x740.png"), full_page=True)
        page.set_viewport_size({"width": 360, "height": 640})
        page.screenshot(path=str(ARTIFACTS / f"phone-retrying-{lang}-360x640.png"), full_page=True)
        recorded = words(lang, "Your choice is recorded: %(n)s. Waiting for the others.") % {"n": 2}
        page.get_by_text(recorded).wait_for(timeout=30_000)
    finally:
        page.close()
        console.close()
    assert left["failures"] == 0  # every planned failure really happened
    with Store(server.db_path) as store:
        events = store.events(store.sessions()[-1].session_id)
    mine = [e for e in events if e.kind == "harvest_submitted" and (e.body["group"], e.body["seat"]) == seat]
    assert len(mine) == 1 and mine[0].body["harvest"] == 2
    wait_until(lambda: server.live.state.groups[seat[0]].pending.get(seat[1]), "the choice in the state")
