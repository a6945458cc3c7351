"""Console access in headless Chromium: the guessing warning appears live, log out ends the login.

A real browser matters here: under ``Referrer-Policy: no-referrer`` Chromium sends
``Origin: null`` with a same-origin form, so the form token is what lets the log-out
button through.
"""

from __future__ import annotations

import pytest
import requests
from conftest import ARTIFACTS

pytestmark = pytest.mark.browser

GUESSING = {"en": "guessing seat codes", "es": "adivinando códigos", "fr": "deviner des codes"}


@pytest.mark.parametrize("lang", ["en", "es", "fr"])
def test_console_shows_the_guessing_warning_and_logs_out(start_server, demo_study, browser, lang):
    server = start_server(demo_study)
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    page = context.new_page()
    try:
        page.goto(f"{server.url}/console/login?lang={lang}")
        page.locator("#pin").fill(server.pin)
        page.locator("form button[type=submit]").click()
        page.locator("#status-word").wait_for()
        assert page.locator("#guessing-warning").is_hidden()
        for n in range(8):  # one address: slowed after five wrong codes, and the console is told
            requests.post(f"{server.url}/join", data={"code": f"ZZZZ{n:02d}"}, timeout=5)
        page.locator("#guessing-warning").wait_for(state="visible")
        assert GUESSING[lang] in page.locator("#guessing-warning").inner_text()
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"console-guessing-{lang}.png"))
        cookies = {c["name"]: c["value"] for c in context.cookies()}
        page.locator("form.inline button[type=submit]").click()  # Log out, a real form
        page.locator("#pin").wait_for()
        # The cookie the browser held before logging out opens nothing now.
        stale = requests.get(f"{server.url}/console", cookies=cookies, allow_redirects=False, timeout=5)
        assert stale.status_code == 302 and "/console/login" in stale.headers["Location"]
        answer = requests.post(f"{server.url}/console/logout", cookies=dict(cookies, lang=lang),
                               headers={"Origin": "http://evil.example"}, timeout=5)
        assert answer.status_code == 403
        refused = context.new_page()
        refused.set_content(answer.text.replace('href="/static/', f'href="{server.url}/static/'))
        refused.screenshot(path=str(ARTIFACTS / f"console-refused-{lang}.png"))
        refused.close()
    finally:
        context.close()
