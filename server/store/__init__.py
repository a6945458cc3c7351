"""The append-only SQLite event log: the only code that touches the database."""

from .log import SeatKey, SessionRecord, Store

__all__ = ["SeatKey", "SessionRecord", "Store"]
