"""Run the app on Werkzeug's threaded server (Flask-SocketIO's threading mode).

The server is built with ``make_server`` rather than ``socketio.run`` so that the
bound port is known before serving (``--port 0`` picks a free one) and tests can
shut it down cleanly.
"""

from __future__ import annotations

import logging
import socket
from collections.abc import Callable

from flask import Flask
from werkzeug.serving import BaseWSGIServer, WSGIRequestHandler, make_server


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
