"""Run the app on Werkzeug's threaded server (Flask-SocketIO's threading mode).

The server is built with ``make_server`` rather than ``socketio.run`` so that the
bound port is known before serving (``--port 0`` picks a free one) and tests can
shut it down cleanly.
"""

from __future__ import annotations

import io
import logging
import socket
from collections.abc import Callable, Iterable

from flask import Flask
from werkzeug.serving import BaseWSGIServer, WSGIRequestHandler, make_server

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


class _RequestHandler(WSGIRequestHandler):
    """Closes a connection once its websocket ends, instead of reading its last frames as HTTP."""

    def setup(self) -> None:
        super().setup()
        # A refusal is two small frames (problem event, then the acknowledgement); with Nagle's
        # algorithm the second waits for the peer's delayed ACK, about 40 ms on Linux.
        self.connection.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)

    def run_wsgi(self) -> None:
        super().run_wsgi()
        if self.headers.get("Upgrade", "").lower() == "websocket":
            self.close_connection = True


def build_server(app: Flask, host: str, port: int) -> BaseWSGIServer:
    """Bind (one thread per connection) without serving yet."""
    logging.getLogger("werkzeug").setLevel(logging.WARNING)
    return make_server(host, port, app, threaded=True, request_handler=_RequestHandler)


def serve(app: Flask, host: str, port: int, announce: Callable[[int], None]) -> None:
    """Bind, tell ``announce`` the port, serve until interrupted."""
    server = build_server(app, host, port)
    announce(server.server_port)
    try:
        server.serve_forever()
    except KeyboardInterrupt:
        pass
    finally:
        server.server_close()
