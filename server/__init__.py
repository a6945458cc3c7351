"""The shell around the game core: HTTP pages, sockets, storage and the CLI."""

from __future__ import annotations

__all__ = ["create_app", "socketio"]


def __getattr__(name: str):
    # Lazy, so that ``ebbtide serve`` can monkey-patch for gevent (server/serving.py) before
    # Flask and the rest are imported: ``python -m ebbtide.server.cli`` imports this package first.
    if name in __all__:
        from . import app

        return getattr(app, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
