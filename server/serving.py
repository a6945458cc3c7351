"""The production server: gevent's WSGI server with simple-websocket, or Werkzeug's threads.

Chosen by measurement (bench/live_load.py, docs/performance.md): gevent serves hundreds of
phones from one process on Windows, macOS and Linux (gunicorn does not run on Windows, and
Werkzeug's server is a development server with one OS thread per open socket). Threads stay
available with ``EBBTIDE_SERVER=threading``, and the test suite's in-process servers use them
because pytest's interpreter is not monkey-patched.

gevent needs the standard library monkey-patched before anything else is imported, so that
locks, sockets and sleeps cooperate. ``prepare_process`` does that, and only in a process
that is about to serve (``ebbtide serve`` / ``ebbtide demo``): it is the first statement of
``server/cli.py``, and this module imports nothing else at import time for that reason.
"""

from __future__ import annotations

import gc
import os
import sys

SERVER_KINDS = ("gevent", "threading")
DEFAULT_SERVER = "gevent"
SERVING_COMMANDS = frozenset({"serve", "demo"})


def chosen_server() -> str:
    """``EBBTIDE_SERVER`` (gevent | threading), else the default; an unknown name stops with one line."""
    kind = os.environ.get("EBBTIDE_SERVER", DEFAULT_SERVER).strip().lower() or DEFAULT_SERVER
    if kind not in SERVER_KINDS:
        sys.exit(f"EBBTIDE_SERVER is {kind!r}; allowed: {', '.join(SERVER_KINDS)}")
    return kind


def prepare_process(argv: list[str]) -> None:
    """Monkey-patch for gevent when this process is going to serve; do nothing otherwise."""
    command = next((arg for arg in argv[1:] if not arg.startswith("-")), None)
    if command in SERVING_COMMANDS and chosen_server() == "gevent":
        try:
            from gevent import monkey
        except ImportError:  # a declared dependency, but a half-finished install still serves
            print("gevent is not installed: serving with threads (pip install gevent for the "
                  "production server)", file=sys.stderr)
            return
        monkey.patch_all()


def async_mode() -> str:
    """The Socket.IO async mode that matches this process: gevent only when it is patched."""
    if "gevent" in sys.modules:
        from gevent import monkey

        if monkey.is_module_patched("threading"):
            return "gevent"
    return "threading"


def run_blocking(work):
    """Run ``work()`` where a slow system call (an fsync) does not stall the other phones.

    Under gevent a blocking call in the hub's thread stops every greenlet, so it goes to
    gevent's thread pool while this greenlet waits; with OS threads it simply runs here.
    """
    if async_mode() == "gevent":
        import gevent

        return gevent.get_hub().threadpool.apply(work)
    return work()


def _gevent_server(app, host: str, port: int):
    import logging
    import socket

    from gevent.pywsgi import WSGIHandler, WSGIServer

    class Handler(WSGIHandler):
        def handle(self):
            # Small frames (a refusal is two) must not wait for the peer's delayed ACK (Nagle).
            self.socket.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            super().handle()

        def run_application(self):
            super().run_application()
            if self.environ.get("HTTP_UPGRADE", "").lower() == "websocket":
                # The websocket is over: close, instead of reading its last frames as HTTP.
                self.close_connection = True

    class GeventServer(WSGIServer):
        """gevent's server with the few methods the CLI and the tests call on Werkzeug's."""

        def serve_forever(self, poll_interval: float | None = None) -> None:
            super().serve_forever()

        def shutdown(self) -> None:
            self.stop(timeout=2)

        def server_close(self) -> None:
            self.close()

    # The error log is also each request's ``wsgi.errors``, where Flask's log handler (on the
    # logger "ebbtide.server", a parent of this one) writes once a page has failed: it must end at
    # stderr, or logging one failure feeds itself until RecursionError and the client is never answered.
    errors = logging.getLogger("ebbtide.server.gevent")
    errors.propagate = False
    if not errors.handlers:
        errors.addHandler(logging.StreamHandler(sys.stderr))
    server = GeventServer((host, port), app, handler_class=Handler, log=None, error_log=errors)
    server.init_socket()  # bound now, so the port is known before serving
    return server


def build_server(app, host: str, port: int):
    """Bind without serving yet; the server matches the app's async mode.

    The returned object has ``server_port``, ``serve_forever()``, ``shutdown()`` and
    ``server_close()`` whichever server it is.
    """
    if app.extensions["socketio"].server.eio.async_mode == "gevent":
        return _gevent_server(app, host, port)
    return _threaded_server(app, host, port)


def _threaded_server(app, host: str, port: int):
    import logging
    import socket

    from werkzeug.serving import WSGIRequestHandler, make_server

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

    logging.getLogger("werkzeug").setLevel(logging.WARNING)
    return make_server(host, port, app, threaded=True, request_handler=_RequestHandler)


def serve(app, host: str, port: int, announce) -> None:
    """Bind, tell ``announce`` the port, serve until interrupted."""
    server = build_server(app, host, port)
    calm_garbage_collector()
    announce(server.server_port)
    try:
        server.serve_forever()
    except KeyboardInterrupt:
        pass
    finally:
        server.server_close()


# Collections of the youngest generation after this many new container objects (CPython: 700),
# and of the middle one after this many young ones (CPython: 10 and 10).
GC_THRESHOLDS = (50_000, 20, 10)


def calm_garbage_collector() -> None:
    """Keep the cycle collector out of the way of a burst of decisions.

    What exists once the app is built (libraries, the study, the replayed session) lives as
    long as the process, so it is moved out of the collector's sight (``gc.freeze``); and
    collections run less often. With CPython's defaults, full collections of a 600-phone
    server took 0.15-0.25 s each, every one of them a pause for every phone
    (docs/performance.md). Memory is kept: nearly everything is freed by reference counting.
    """
    gc.collect()
    gc.freeze()
    gc.set_threshold(*GC_THRESHOLDS)
