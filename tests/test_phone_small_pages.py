"""Small answers around the phone: the favicon, and refusals in the seat's language."""

from __future__ import annotations

from pathlib import Path

import requests
from babel.messages.pofile import read_po

from ebbtide.server.phone.refusals import phone_refusal

ROOT = Path(__file__).resolve().parent.parent


def test_the_favicon_answers_with_a_small_drawing(start_server, demo_study):
    server = start_server(demo_study)
    answer = requests.get(f"{server.url}/favicon.ico", timeout=5)
    assert answer.status_code == 200
    assert answer.headers["Content-Type"].startswith("image/svg+xml")
    assert answer.content.lstrip().startswith(b"<svg") and len(answer.content) < 2000


def _catalogue(language: str) -> dict[str, str]:
    """The translations as Babel's own .po reader sees them (not through our code)."""
    with open(ROOT / "translations" / language / "LC_MESSAGES" / "messages.po", "rb") as handle:
        return {m.id: m.string for m in read_po(handle) if m.id}


def test_a_refusal_reaches_a_phone_in_its_language_by_code(start_server, demo_study):
    server = start_server(demo_study)
    english = "The game is paused. Please wait."
    core = {"ok": False, "event": "harvest", "code": "paused",
            "message": "the session is paused; wait until the facilitator resumes it"}
    with server.app.test_request_context():
        for language in ("es", "fr"):
            body = phone_refusal(core, language)
            assert body["message"] == _catalogue(language)[english] != english
            assert {k: v for k, v in body.items() if k != "message"} == {k: v for k, v in core.items()
                                                                          if k != "message"}
        unknown = phone_refusal({**core, "code": "no_such_code"}, "es")
        assert "the session is paused" not in unknown["message"]  # never the log's English line
        assert unknown["message"] == _catalogue("es")[
            "This phone sent something the laptop could not use. Reload the page and try again."]
