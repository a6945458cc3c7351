"""Console access over real HTTP and sockets: logout revokes, idle logins expire, forms from
elsewhere are refused, every answer carries its headers (Engine.IO's long-polling ones too)."""

from __future__ import annotations

import re
import time

import pytest
import requests
import socketio
from conftest import WAIT_SECONDS, connect_console, console_login, wait_until

EVIL = "http://evil.example"


@pytest.fixture
def server(start_server, demo_study):
    return start_server(demo_study)


def copy_of(http: requests.Session) -> requests.Session:
    """Another browser holding a copy of this one's cookies (copied before logout)."""
    stolen = requests.Session()
    stolen.cookies.update(http.cookies)
    return stolen


def console_socket(url: str, http: requests.Session, **headers) -> socketio.Client:
    cookie = "; ".join(f"{k}={v}" for k, v in http.cookies.items())
    client = socketio.Client(reconnection=False)
    client.connect(url, auth={"role": "console"}, headers={"Cookie": cookie, **headers},
                   transports=["websocket"], wait_timeout=WAIT_SECONDS)
    return client


def console_get_paths(server) -> list[str]:
    """Every GET route of the console and teaching blueprints, from the app's own url map."""
    paths = []
    for rule in server.app.url_map.iter_rules():
        if "GET" in rule.methods and (rule.rule.startswith("/console") or rule.rule.startswith("/teach")):
            if rule.endpoint != "console.console_login":
                paths.append(re.sub(r"<int:\w+>", "1", rule.rule))
    return paths


def test_a_cookie_copied_before_logout_opens_nothing_afterwards(server):
    http = console_login(server.url, server.pin)
    stolen = copy_of(http)
    paths = console_get_paths(server)
    assert "/console/debrief" in paths and "/teach/gauges.json" in paths
    assert stolen.get(f"{server.url}/console", allow_redirects=False, timeout=5).status_code == 200
    open_socket = console_socket(server.url, stolen)
    try:
        logout = http.post(f"{server.url}/console/logout", data={"form_token": http.form_token},
                           allow_redirects=False, timeout=5)
        assert logout.status_code == 303
        for path in paths:
            answer = stolen.get(f"{server.url}{path}", allow_redirects=False, timeout=5)
            assert answer.status_code == 302 and "/console/login" in answer.headers["Location"], path
        # The socket opened with the copy before logout is closed, and no new one opens.
        wait_until(lambda: not open_socket.connected, "the copied console socket to be closed")
        with pytest.raises(socketio.exceptions.ConnectionError):
            console_socket(server.url, stolen)
        assert server.live.state.status == "setup"
    finally:
        open_socket.disconnect()
        open_socket.eio.ws and open_socket.eio.ws.sock and open_socket.eio.ws.sock.close()


def test_console_events_after_logout_are_refused(server):
    http = console_login(server.url, server.pin)
    client = console_socket(server.url, http)
    try:
        # Revoke from another thread of the same browser: the server drops the login at once.
        http.post(f"{server.url}/console/logout", data={"form_token": http.form_token}, timeout=5)
        if client.connected:  # the server closes it; if the close is still on its way, the event is refused
            try:
                answer = client.call("console_start", {}, timeout=WAIT_SECONDS)
                assert answer["ok"] is False and answer["code"] == "logged_out"
            except (socketio.exceptions.BadNamespaceError, socketio.exceptions.TimeoutError):
                pass
        assert server.live.state.status == "setup"
    finally:
        client.disconnect()


def test_an_idle_console_login_expires(server):
    server.app.config["EBBTIDE_CONSOLE_IDLE_SECONDS"] = 1.0
    http = console_login(server.url, server.pin)
    client = console_socket(server.url, http)
    try:
        time.sleep(1.5)
        answer = client.call("console_start", {}, timeout=WAIT_SECONDS)
        assert answer["ok"] is False and answer["code"] == "logged_out"
        page = http.get(f"{server.url}/console", allow_redirects=False, timeout=5)
        assert page.status_code == 302 and "/console/login" in page.headers["Location"]
        assert server.live.state.status == "setup"
        # An active login stays: every page or action counts as use.
        fresh = console_login(server.url, server.pin)
        for _ in range(3):
            time.sleep(0.5)
            assert fresh.get(f"{server.url}/console", allow_redirects=False, timeout=5).status_code == 200
    finally:
        client.disconnect()


def test_console_forms_without_their_token_or_from_another_origin_change_nothing(server):
    http = console_login(server.url, server.pin)
    tries = [
        ({}, {}),  # a cross-site form cannot know the token (SameSite aside)
        ({"form_token": "guessed-token-value"}, {}),
        ({"form_token": http.form_token}, {"Origin": EVIL}),
        ({"form_token": http.form_token}, {"Referer": f"{EVIL}/page"}),
    ]
    for data, headers in tries:
        logout = http.post(f"{server.url}/console/logout", data=data, headers=headers,
                           allow_redirects=False, timeout=5)
        assert logout.status_code == 403, (data, headers)
        assert "did not come from this console" in logout.text
        assert http.get(f"{server.url}/console", allow_redirects=False, timeout=5).status_code == 200
    # Same-origin browsers send their own Origin (or "null" under no-referrer): accepted with the token.
    same = http.post(f"{server.url}/console/logout", data={"form_token": http.form_token},
                     headers={"Origin": server.url}, allow_redirects=False, timeout=5)
    assert same.status_code == 303


def test_login_and_join_forms_from_another_origin_are_refused(server):
    login = requests.post(f"{server.url}/console/login", data={"pin": server.pin}, headers={"Origin": EVIL},
                          allow_redirects=False, timeout=5)
    assert login.status_code == 403 and "session" not in login.cookies
    join = requests.post(f"{server.url}/join", data={"code": server.keys[0].short_code},
                         headers={"Origin": EVIL}, allow_redirects=False, timeout=5)
    assert join.status_code == 403


def test_console_socket_from_another_origin_is_refused(server):
    http = console_login(server.url, server.pin)
    with pytest.raises(socketio.exceptions.ConnectionError):
        console_socket(server.url, http, Origin=EVIL)
    console = connect_console(server.url, server.pin)  # and the same cookie from no browser at all works
    console.close()


def test_every_route_answers_no_store_and_the_security_headers(server):
    http = console_login(server.url, server.pin)
    key = server.keys[0]
    checked = []
    for rule in server.app.url_map.iter_rules():
        if rule.endpoint == "static":
            continue
        path = re.sub(r"<int:\w+>", "1", rule.rule).replace("<secret>", key.secret)
        if "GET" in rule.methods:
            answer = http.get(f"{server.url}{path}", allow_redirects=False, timeout=5)
        else:
            answer = http.post(f"{server.url}{path}", data={"form_token": http.form_token, "code": "XXXXXX",
                                                             "pin": "0000"}, allow_redirects=False, timeout=5)
        assert answer.headers.get("Cache-Control") == "no-store", (path, answer.status_code)
        assert answer.headers["X-Content-Type-Options"] == "nosniff", path
        checked.append(path)
    for path in ("/console/debrief", "/console/debrief/handout/1", "/teach", "/teach/gauges.json",
                 "/console/payments.csv", "/console/export.zip", "/console/debrief/reveal", "/join"):
        assert path in checked
    static = requests.get(f"{server.url}/static/ebbtide.css", timeout=5)
    assert static.ok and static.headers.get("Cache-Control") != "no-store"  # plain files may be cached


def test_long_polling_answers_carry_the_security_headers(server):
    handshake = requests.get(f"{server.url}/socket.io/?EIO=4&transport=polling", timeout=5)
    assert handshake.ok and handshake.text.startswith("0{")
    for answer in (handshake, requests.get(f"{server.url}/socket.io/?EIO=4&transport=polling&sid=nope",
                                           timeout=5)):
        headers = answer.headers
        assert "default-src 'self'" in headers["Content-Security-Policy"]
        assert headers["X-Content-Type-Options"] == "nosniff"
        assert headers["Referrer-Policy"] == "no-referrer"
        assert headers["X-Frame-Options"] == "DENY"
        assert headers["Cache-Control"] == "no-store"


def test_a_malformed_long_polling_message_is_refused(server):
    handshake = requests.get(f"{server.url}/socket.io/?EIO=4&transport=polling", timeout=5)
    sid = handshake.text.split('"sid":"')[1].split('"')[0]
    url = f"{server.url}/socket.io/?EIO=4&transport=polling&sid={sid}"
    answer = requests.post(url, data="421" + "[" * 4000, timeout=5)
    assert answer.status_code == 400 and "refused" in answer.text
    assert answer.headers["X-Frame-Options"] == "DENY"
