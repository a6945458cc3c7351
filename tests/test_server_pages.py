"""Pages through Flask's test client: console login, seat cards, joining, languages, headers."""

from __future__ import annotations

import re

import pytest
from conftest import DEMO

from ebbtide.game_logic.study import load_study
from ebbtide.server import create_app

PIN = "8642"


@pytest.fixture
def app(tmp_path):
    app = create_app({"EBBTIDE_DB": str(tmp_path / "pages.db"), "EBBTIDE_STUDY": load_study(DEMO),
                      "EBBTIDE_SEED": 3, "EBBTIDE_PIN": PIN, "EBBTIDE_PUBLIC_URL": "http://192.0.2.10:8750"})
    yield app
    app.extensions["ebbtide"].store.close()


@pytest.fixture
def client(app):
    return app.test_client()


def logged_in(client):
    response = client.post("/console/login", data={"pin": PIN})
    assert response.status_code == 303
    return client


def test_console_needs_the_pin(client):
    assert client.get("/console").headers["Location"].endswith("/console/login")
    assert client.get("/console/cards").status_code == 302
    assert client.get("/console/export.zip").status_code == 302


def test_wrong_pins_are_slowed_down_after_five_attempts(client):
    codes = [client.post("/console/login", data={"pin": "0000"}).status_code for _ in range(6)]
    assert codes[:5] == [403] * 5 and codes[5] == 429
    assert client.post("/console/login", data={"pin": PIN}).status_code == 429  # even the right one waits


def test_seat_cards_hold_a_qr_code_and_short_code_per_seat(app, client):
    page = logged_in(client).get("/console/cards").get_data(as_text=True)
    keys = app.extensions["ebbtide"].current.keys
    assert page.count("<svg") == len(keys) == 4
    for key in keys:
        assert f"{key.short_code[:3]} {key.short_code[3:]}" in page
        assert not set(key.short_code) & set("0O1I")
        assert len(key.secret) >= 22  # 18 random bytes in URL-safe base64: 144 bits
    assert "http://192.0.2.10:8750/play" in page


def test_no_page_refers_to_anything_outside_the_laptop(client):
    logged_in(client)
    for path in ("/play", "/console", "/console/cards", "/console/login"):
        page = client.get(path).get_data(as_text=True)
        external = [u for u in re.findall(r'(?:src|href)="([^"]+)"', page) if "//" in u]
        assert external == [], (path, external)


def test_typed_short_code_leads_to_the_seat_and_a_wrong_one_says_what_is_allowed(app, client):
    key = app.extensions["ebbtide"].current.keys[2]
    ok = client.post("/join", data={"code": key.short_code.lower()})
    assert ok.status_code == 303 and ok.headers["Location"].endswith(f"/s/{key.secret}")
    wrong = client.post("/join", data={"code": "2222"})
    assert wrong.status_code == 400 and "no 0, O, 1 or I" in wrong.get_data(as_text=True)


def test_unknown_card_link_is_a_clear_404(client):
    response = client.get("/s/" + "Z" * 24)
    assert response.status_code == 404 and "not part of the game" in response.get_data(as_text=True)


def test_language_comes_from_the_study_and_a_lang_parameter_among_its_languages(client):
    assert '<html lang="en">' in client.get("/play").get_data(as_text=True)
    assert '<html lang="fr">' in client.get("/play?lang=fr").get_data(as_text=True)
    assert '<html lang="fr">' in client.get("/play").get_data(as_text=True)  # remembered in a cookie
    assert '<html lang="fr">' in client.get("/play?lang=xx").get_data(as_text=True)  # not offered: ignored


def test_pages_carry_security_headers(client):
    headers = client.get("/play").headers
    assert "default-src 'self'" in headers["Content-Security-Policy"]
    assert headers["Referrer-Policy"] == "no-referrer"
    assert headers["X-Content-Type-Options"] == "nosniff"


def test_export_zip_holds_the_contract_files_surveys_and_timeline(client):
    import io
    import zipfile

    data = logged_in(client).get("/console/export.zip").data
    names = sorted(n.split("/")[1] for n in zipfile.ZipFile(io.BytesIO(data)).namelist())
    assert names == ["datapackage.json", "decisions.csv", "rounds.csv", "seats.csv", "surveys.csv",
                     "timeline.csv"]
