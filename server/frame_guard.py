"""Every Socket.IO frame a client sends is checked before python-socketio acts on it.

Two outcomes, never a library traceback:

- a frame that cannot be read as one of our messages (not text, empty, not an
  Engine.IO or Socket.IO packet, more than ``MAX_CONTAINERS`` lists or objects,
  an integer with more than ``MAX_INT_DIGITS`` digits, many binary attachments) closes
  the sender's connection cleanly: the phone page reconnects by itself, and a
  hostile client only loses its own socket;
- a readable event whose name is not one of the application's events (a list,
  an object, ``*``, or a name the library keeps for itself such as ``connect``
  and ``disconnect``) is refused like any unknown event, counted by the flood
  limit, and never reaches a handler.
"""

from __future__ import annotations

import json
import logging
import re
from collections.abc import Callable

from socketio import packet as sio_packet

log = logging.getLogger("ebbtide.frames")

MAX_CONTAINERS = 64  # our largest message (paper slips) holds one list
MAX_INT_DIGITS = 30  # no number of ours comes near; Python refuses 4300 with an exception
MAX_EVENT_NAME = 64
# Names python-socketio dispatches to the app's own connection handlers or its catch-all.
RESERVED_EVENTS = frozenset({"connect", "disconnect", "*", "message", "connect_error"})
CLIENT_ENGINE_TYPES = frozenset("123456")  # close, ping, pong, message, upgrade, noop
# connect, disconnect, event, acknowledgement, and the binary event and acknowledgement
CLIENT_SOCKET_TYPES = frozenset("012356")
MAX_ATTACHMENTS = 4
ATTACHMENTS = re.compile(r"^[56](\d+)-")


class BadFrame(ValueError):
    """A frame that is not one of our messages; its connection is closed."""


def _bounded_int(text: str) -> int:
    if len(text.lstrip("-")) > MAX_INT_DIGITS:
        raise BadFrame(f"a number with {len(text)} digits; at most {MAX_INT_DIGITS} are allowed")
    return int(text)


class BoundedJSON:
    """``json`` with bounded integers; deep nesting is a ``BadFrame``, never a ``RecursionError``."""

    @staticmethod
    def dumps(*args, **kwargs) -> str:
        return json.dumps(*args, **kwargs)

    @staticmethod
    def loads(text, *args, **kwargs):
        try:
            return json.loads(text, *args, parse_int=_bounded_int, **kwargs)
        except RecursionError as exc:
            raise BadFrame("a message nested too deeply") from exc


class CheckedPacket(sio_packet.Packet):
    """A Socket.IO packet that fails with ``BadFrame`` on anything a client of ours never sends."""

    json = BoundedJSON
    # Nothing the server sends holds bytes (every payload is a JSON-mode dump), and looking
    # for them walked every snapshot item by item: a sixth of a decision's CPU with hundreds
    # of phones (docs/performance.md). Bytes sent by mistake fail in json.dumps, loudly.
    uses_binary_events = False

    def decode(self, encoded_packet):
        problem = socket_packet_problem(encoded_packet)
        if problem:
            raise BadFrame(problem)
        try:
            return super().decode(encoded_packet)
        except BadFrame:
            raise
        except (ValueError, TypeError, IndexError, AttributeError) as exc:
            raise BadFrame(f"not a Socket.IO packet ({exc})") from exc


def socket_packet_problem(text) -> str | None:
    """Why a Socket.IO packet (the text after Engine.IO's ``4``) is refused, or None."""
    if not isinstance(text, str):
        return "a binary frame that no message announced"
    if not text or text[0] not in CLIENT_SOCKET_TYPES:
        return "not a Socket.IO packet a client may send (connect, disconnect, event, acknowledgement)"
    attachments = ATTACHMENTS.match(text)
    if attachments and int(attachments.group(1)[:6]) > MAX_ATTACHMENTS:
        return f"more than {MAX_ATTACHMENTS} binary attachments in one message"
    if text.count("[") + text.count("{") > MAX_CONTAINERS:
        return f"more than {MAX_CONTAINERS} lists or objects in one message"
    return None


def engine_frame_problem(frame) -> str | None:
    """Why one Engine.IO frame from a client is refused, or None."""
    if isinstance(frame, bytes | bytearray):
        return None  # a binary attachment: Socket.IO checks that a message announced it
    if not isinstance(frame, str) or not frame:
        return "not an Engine.IO packet"
    if frame[0] == "b":
        return None  # a base64 attachment on long-polling, as above
    if frame[0] not in CLIENT_ENGINE_TYPES:
        return "not an Engine.IO packet"
    if frame[0] == "4":
        return socket_packet_problem(frame[1:])
    return None


def polling_body_problem(body: str) -> str | None:
    """Why a long-polling POST body (frames separated by U+001E) is refused, or None."""
    for frame in body.split("\x1e"):
        problem = engine_frame_problem(frame)
        if problem:
            return problem
    return None


def event_name_problem(data, known: Callable[[], set[str]]) -> str | None:
    """Why an event packet's name is refused, or None for one of the application's events."""
    if not isinstance(data, list) or not data:
        return "an event needs a name"
    name = data[0]
    if not isinstance(name, str) or len(name) > MAX_EVENT_NAME:
        return "an event name must be a short text"
    if name in RESERVED_EVENTS or name not in known():
        return "unknown event"
    return None


def describe_event(data) -> str:
    """A short, safe label for an event name, whatever its type, for a refusal message."""
    name = data[0] if isinstance(data, list) and data else None
    if isinstance(name, str):
        return name[:40]
    return f"<{type(name).__name__}>"


def install(server, refuse_event: Callable[[str, str], dict]) -> None:
    """Put the checks in front of one ``socketio.Server`` (and its Engine.IO server).

    ``refuse_event(sid, label)`` builds the refusal for an event that is not ours
    (it counts toward the sender's flood limit); it is sent as the ``problem``
    event and as the acknowledgement, like every other refusal.
    """
    server.packet_class = CheckedPacket
    eio = server.eio
    read_message = server._handle_eio_message
    dispatch_event = server._handle_event

    def known() -> set[str]:
        return {name for name in server.handlers.get("/", {}) if name not in RESERVED_EVENTS}

    def on_message(eio_sid, data):
        try:
            read_message(eio_sid, data)
        except (ValueError, TypeError, IndexError, KeyError, AttributeError) as exc:
            # BadFrame, or the library's own complaint (an attachment nobody announced, ...): one line.
            log.warning("closed a connection that sent an unreadable frame: %s", exc)
            eio.disconnect(eio_sid)

    def on_event(eio_sid, namespace, ack_id, data):
        if event_name_problem(data, known) is None:
            return dispatch_event(eio_sid, namespace, ack_id, data)
        namespace = namespace or "/"
        sid = server.manager.sid_from_eio_sid(eio_sid, namespace)
        if sid is None or not server.manager.is_connected(sid, namespace):
            return None
        body = refuse_event(sid, describe_event(data))
        server.emit("problem", body, to=sid, namespace=namespace)
        if ack_id is not None:
            server._send_packet(eio_sid, server.packet_class(
                sio_packet.ACK, namespace=namespace, id=ack_id, data=[body]))
        return None

    eio.on("message", on_message)
    server._handle_event = on_event
    eio._async = dict(eio._async, websocket=_checked_websocket(eio._async["websocket"]))


def _checked_websocket(base: type) -> type:
    """The Engine.IO websocket wrapper, reading only frames that pass ``engine_frame_problem``."""

    class CheckedWebSocket(base):
        def wait(self):
            frame = super().wait()
            if frame is None:
                return None
            problem = engine_frame_problem(frame)
            if problem:
                # Engine.IO ends the connection cleanly on an error from wait(), logging one line.
                log.warning("closed a websocket that sent an unreadable frame: %s", problem)
                raise BadFrame(problem)
            return frame

    return CheckedWebSocket
