"""The shell around the game core: HTTP pages, sockets, storage and the CLI."""

from .app import create_app, socketio

__all__ = ["create_app", "socketio"]
