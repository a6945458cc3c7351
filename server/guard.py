"""The one place for response headers and long-polling checks: a WSGI middleware around the app.

It wraps Flask *and* the Engine.IO layer in front of it, so long-polling answers get the
same headers as pages.
"""

from __future__ import annotations

import io
import logging
from collections.abc import Callable, Iterable

from .frame_guard import polling_body_problem

log = logging.getLogger("ebbtide.frames")

# Nothing loads from elsewhere (no inline script at all: page data travels in
# <script type="application/json">); no framing; a join link never leaks through a referrer.
SECURITY_HEADERS = (
    ("Content-Security-Policy",
     "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; "
     "connect-src 'self'; frame-ancestors 'none'; form-action 'self'"),
    ("X-Content-Type-Options", "nosniff"),
    ("Referrer-Policy", "no-referrer"),
    ("X-Frame-Options", "DENY"),
)
STATIC_PREFIX = "/static/"
SOCKET_PREFIX = "/socket.io/"


class GuardedWSGI:
    """The one place for response headers, around Flask *and* the Engine.IO layer in front of it.

    Every answer gets the security headers (long-polling answers too, which Engine.IO
    writes before Flask sees the request) and ``Cache-Control: no-store``, except the
    files under ``/static/``: pages carry seat secrets, hidden values or payments, and
    a shared phone's cache must not keep them. Long-polling POST bodies are checked
    frame by frame (``frame_guard``) before Engine.IO reads them.
    """

    def __init__(self, app: Callable, max_body: int):
        self.app = app
        self.max_body = max_body

    def __call__(self, environ: dict, start_response: Callable) -> Iterable[bytes]:
        path = environ.get("PATH_INFO", "")
        cacheable = path.startswith(STATIC_PREFIX)

        def start(status, headers, exc_info=None):
            present = {name.lower() for name, _ in headers}
            headers = [(n, v) for n, v in headers if cacheable or n.lower() != "cache-control"]
            headers += [(n, v) for n, v in SECURITY_HEADERS if n.lower() not in present]
            if not cacheable:
                headers.append(("Cache-Control", "no-store"))
            return start_response(status, headers, exc_info) if exc_info else start_response(status, headers)

        if path.startswith(SOCKET_PREFIX) and environ.get("REQUEST_METHOD") == "POST":
            problem = self._polling_problem(environ)
            if problem:
                log.warning("refused a long-polling message: %s", problem)
                body = f"refused: {problem}".encode()
                start("400 Bad Request", [("Content-Type", "text/plain; charset=utf-8"),
                                          ("Content-Length", str(len(body)))])
                return [body]
        return self.app(environ, start)

    def _polling_problem(self, environ: dict) -> str | None:
        try:
            length = int(environ.get("CONTENT_LENGTH") or 0)
        except ValueError:
            return "no readable Content-Length"
        if length > self.max_body:
            return None  # Engine.IO answers "Content is too long" itself
        raw = environ["wsgi.input"].read(length)
        environ["wsgi.input"] = io.BytesIO(raw)  # Engine.IO reads the same bytes again
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            return "the body is not UTF-8 text"
        return polling_body_problem(text) if text else None
