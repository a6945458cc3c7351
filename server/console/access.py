"""Who may act as the console: server-side logins, a form token, origin checks; the rehearsal credential.

The browser's cookie (signed with the session's key) holds only a random login id.
The login itself lives here, in the server's memory: logging out revokes it at once
(every page and socket event refuses it, its open sockets are closed), it expires
after ``IDLE_SECONDS`` without a console page or action, and a restart ends every
login (the PIN is asked again; the PIN itself never changes during a session).
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
import threading
from dataclasses import dataclass, field
from urllib.parse import urlsplit

from flask import current_app, request, session

IDLE_SECONDS = 2 * 3600  # a facilitator acts at least once a block; a forgotten laptop stops being a console
SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
COOKIE_KEY = "console_login"
FORM_FIELD = "form_token"


@dataclass
class ConsoleLogin:
    session_id: str
    form_token: str
    last_seen: float
    sockets: set[str] = field(default_factory=set)


class ConsoleLogins:
    """Every live console login of one server; ``now`` (monotonic seconds) comes from the caller."""

    def __init__(self, idle_seconds: float = IDLE_SECONDS):
        self.idle_seconds = idle_seconds
        self._logins: dict[str, ConsoleLogin] = {}
        self._lock = threading.Lock()

    def open(self, session_id: str, now: float) -> str:
        login_id = secrets.token_urlsafe(32)
        with self._lock:
            self._logins[login_id] = ConsoleLogin(session_id, secrets.token_urlsafe(24), now)
        return login_id

    def check(self, login_id: str | None, session_id: str, now: float) -> ConsoleLogin | None:
        """The login if it is live for this session (and counts as activity), else None."""
        if not isinstance(login_id, str):
            return None
        with self._lock:
            login = self._logins.get(login_id)
            if login is None or login.session_id != session_id:
                return None
            if now - login.last_seen > self.idle_seconds:
                del self._logins[login_id]
                return None
            login.last_seen = now
            return login

    def attach(self, login_id: str, sid: str) -> None:
        with self._lock:
            if login_id in self._logins:
                self._logins[login_id].sockets.add(sid)

    def detach(self, login_id: str, sid: str) -> None:
        with self._lock:
            if login_id in self._logins:
                self._logins[login_id].sockets.discard(sid)

    def revoke(self, login_id: str | None) -> set[str]:
        """End a login; returns the socket ids it had open (to be closed)."""
        with self._lock:
            login = self._logins.pop(login_id, None) if isinstance(login_id, str) else None
        return login.sockets if login else set()


def logins() -> ConsoleLogins:
    idle = current_app.config.get("EBBTIDE_CONSOLE_IDLE_SECONDS") or IDLE_SECONDS
    return current_app.extensions.setdefault("ebbtide_console_logins", ConsoleLogins(idle))


def request_login(session_id: str, now: float) -> ConsoleLogin | None:
    """The live console login of the browser behind this request (page or socket), if any."""
    return logins().check(session.get(COOKIE_KEY), session_id, now)


def form_token_ok(login: ConsoleLogin) -> bool:
    sent = request.form.get(FORM_FIELD, "")
    return hmac.compare_digest(sent.encode(), login.form_token.encode())


def _origin(url: str) -> str:
    parts = urlsplit(url)
    return f"{parts.scheme}://{parts.netloc}".lower()


def cross_origin() -> bool:
    """True when a state-changing request names another site as its origin (Origin, else Referer).

    ``Origin: null`` (what a browser sends under ``Referrer-Policy: no-referrer``) names
    no site; console forms are covered by their form token in any case.
    """
    own = _origin(request.host_url)
    origin = request.headers.get("Origin")
    if origin and origin != "null":
        return _origin(origin) != own
    referer = request.headers.get("Referer")
    return bool(referer) and _origin(referer) != own


def rehearsal_token(session_secret: str) -> str:
    """The credential that lets a socket play a seat as a bot: derived from the session's own key.

    Only the database holds that key (phones never see it), so only ``ebbtide rehearse``,
    which reads the database, can present it.
    """
    return hmac.new(session_secret.encode(), b"ebbtide rehearsal bots", hashlib.sha256).hexdigest()[:40]
