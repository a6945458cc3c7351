"""Typed seat codes cannot be guessed without limit: per address, per device, for everyone.

Many addresses are real here: every 127.x.y.z address reaches the server on loopback
(Linux routes all of 127.0.0.0/8 to the loopback interface), so each source address
below is a distinct client to the server.
"""

from __future__ import annotations

import http.client
import itertools
from urllib.parse import urlencode

import pytest
from conftest import connect_console, wait_until

from ebbtide.server.ratelimit import FailureBudget, FailureLimiter
from ebbtide.server.registry import SHORT_CODE_ALPHABET


@pytest.fixture
def server(start_server, demo_study):
    return start_server(demo_study)


def wrong_codes(server):
    taken = {k.short_code for k in server.keys}
    for letters in itertools.product(SHORT_CODE_ALPHABET, repeat=6):
        code = "".join(letters)
        if code not in taken:
            yield code


def post_join(url: str, code: str, source: str = "127.0.0.1", device: str | None = None) -> tuple[int, str]:
    """One join form from ``source``; returns (status, device cookie the server set)."""
    host, port = url.removeprefix("http://").split(":")
    conn = http.client.HTTPConnection(host, int(port), timeout=5, source_address=(source, 0))
    headers = {"Content-Type": "application/x-www-form-urlencoded"}
    if device:
        headers["Cookie"] = f"join_device={device}"
    try:
        conn.request("POST", "/join", urlencode({"code": code}), headers)
        answer = conn.getresponse()
        answer.read()
        cookie = answer.getheader("Set-Cookie") or ""
        device = cookie.split("join_device=")[1].split(";")[0] if "join_device=" in cookie else ""
        return answer.status, device
    finally:
        conn.close()


def test_own_code_mixed_into_guesses_does_not_reset_the_count(server):
    guesses = wrong_codes(server)
    own = server.keys[0].short_code
    statuses = []
    for _ in range(8):
        statuses.append(post_join(server.url, next(guesses))[0])
        statuses.append(post_join(server.url, own)[0])  # a success between every two guesses
    # Five free failures (docs/server.md), then everything from this address waits, own code included.
    assert statuses[:9] == [400, 303] * 4 + [400]
    assert set(statuses[9:]) == {429}


def test_a_device_is_slowed_whichever_address_it_comes_from(server):
    guesses = wrong_codes(server)
    status, device = post_join(server.url, next(guesses), source="127.0.0.2")
    assert status == 400 and device
    for n in range(3, 7):
        assert post_join(server.url, next(guesses), source=f"127.0.0.{n}", device=device)[0] == 400
    assert post_join(server.url, next(guesses), source="127.0.0.9", device=device)[0] == 429
    assert post_join(server.url, next(guesses), source="127.0.0.10")[0] == 400  # another device may try


def test_many_addresses_share_one_budget_and_the_console_is_warned(server):
    console = connect_console(server.url, server.pin)
    try:
        assert console.states[-1]["guessing"] is None
        guesses = wrong_codes(server)
        statuses = []
        for n in range(40):  # 40 addresses, one guess each: no single client is ever slowed
            statuses.append(post_join(server.url, next(guesses), source=f"127.0.1.{n + 1}")[0])
        assert statuses[:30] == [400] * 30 and set(statuses[30:]) == {429}  # 30 a minute for everyone
        state = wait_until(lambda: console.states[-1]["guessing"], "the console's guessing warning")
        assert state["wrong_codes"] == 30 and state["minutes"] == 10
    finally:
        console.close()


def test_failures_fade_with_time_and_waits_double():
    # common practice, no source: a leaky count and doubling waits (the values are ours, docs/server.md)
    limiter = FailureLimiter(free_attempts=5, first_wait=30, max_wait=900, fade_seconds=600)
    for _ in range(5):
        limiter.failed("address:a", now=0)
    assert limiter.wait_seconds("address:a", now=0) == 30
    limiter.failed("address:a", now=30)
    assert limiter.wait_seconds("address:a", now=30) == 60
    # One failure fades every 600 s: an hour later the count is back to zero and no wait remains.
    assert limiter.wait_seconds("address:a", now=3600) == 0
    limiter.failed("address:a", now=3600)
    assert limiter.wait_seconds("address:a", now=3600) == 0
    budget = FailureBudget(per_window=3, window=60)
    for t in (0, 10, 20):
        budget.failed(t)
    assert budget.wait_seconds(20) == 40 and budget.wait_seconds(61) == 0
