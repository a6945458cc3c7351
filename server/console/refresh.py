"""Console refreshes, coalesced: at most one whole console state per interval per session.

The console state holds every group and every round so far, so building and sending it
costs more the bigger the session. Sending it after every accepted harvest made one
decision cost more in a session of 200 groups than in one of 2, and a burst of 1,000
decisions meant 1,000 console states. Instead every change only marks the console stale;
the first change after a quiet spell is sent at once, later ones wait for the interval to
pass and then go out together as one state. So the console sends at most 1/interval states
a second whatever happens, and still shows every decision within one interval.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable

REFRESH_INTERVAL_SECONDS = 0.5  # two console states a second at most; a person reads slower


class CoalescedRefresh:
    """Turns many ``request()`` calls into few ``send()`` calls, never dropping the last change.

    ``later(delay, fn)`` must run ``fn`` after ``delay`` seconds (a background task in the
    server; a fake in tests); ``clock`` gives monotonic seconds.
    """

    def __init__(self, send: Callable[[], None], later: Callable[[float, Callable[[], None]], None],
                 clock: Callable[[], float] = time.monotonic, interval: float = REFRESH_INTERVAL_SECONDS):
        self._send = send
        self._later = later
        self._clock = clock
        self._interval = interval
        self._lock = threading.Lock()
        self._last_sent = float("-inf")
        self._scheduled = False

    def request(self) -> None:
        """Something the console shows has changed."""
        with self._lock:
            if self._scheduled:
                return  # the pending send will carry this change too: it builds the state when it runs
            wait = self._last_sent + self._interval - self._clock()
            if wait > 0:
                self._scheduled = True
            else:
                self._last_sent = self._clock()
        if wait > 0:
            self._later(wait, self._flush)
        else:
            self._send()

    def _flush(self) -> None:
        with self._lock:
            self._scheduled = False
            self._last_sent = self._clock()
        self._send()


def refresh_for(app, session_id: str, send_now: Callable) -> CoalescedRefresh:
    """The coalesced console refresh of one session of ``app`` (made on first use).

    ``send_now(live)`` builds and emits the whole console state; it runs in an app context,
    on a background task when the refresh was deferred.
    """
    refreshers = app.extensions.setdefault("ebbtide_console_refresh", {})
    found = refreshers.get(session_id)
    if found is not None:
        return found
    app = app._get_current_object() if hasattr(app, "_get_current_object") else app

    def send() -> None:
        with app.app_context():
            registry = app.extensions["ebbtide"]
            # A refresh deferred past shutdown has nothing to show (the console panel reads the store).
            if registry.current_id == session_id and not registry.store.closed:
                send_now(registry.current)

    return refreshers.setdefault(session_id, CoalescedRefresh(send, run_later))


def run_later(delay: float, fn: Callable[[], None]) -> None:
    """Run ``fn`` after ``delay`` seconds on a background task of the server (greenlet or thread)."""
    from ..app import socketio

    def run() -> None:
        socketio.sleep(delay)
        fn()

    socketio.start_background_task(run)
