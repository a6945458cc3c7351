"""Named exceptions of the game core, each with a stable ``code``; the edges map them to messages.

The socket edge answers every one of them with a ``problem`` event (code and
message), the ``ebbtide`` command with one line on stderr and exit code 2. The
codes are part of the protocol: phones and the console key their words on them,
so a code, once used, keeps its meaning.
"""

from __future__ import annotations

from typing import Any


class EbbtideError(Exception):
    """Base of every error raised on purpose; ``code`` is stable, ``message`` one English line."""

    code = "error"

    @property
    def message(self) -> str:
        return " ".join(str(self).split())

    def as_event(self, event: str) -> dict[str, Any]:
        """The body of the ``problem`` event and of a negative acknowledgement."""
        return {"ok": False, "event": event, "code": self.code, "message": self.message}


class StudyError(EbbtideError):
    """A study design file is invalid; ``problems`` lists every reason."""

    code = "invalid_study"

    def __init__(self, problems: list[str]):
        self.problems = list(problems)
        super().__init__("; ".join(self.problems))


class Refused(EbbtideError):
    """A request that will not be carried out; nothing was stored or changed.

    ``code`` is stable (the edges translate it); ``message`` is English and says what was
    wrong and what is allowed.
    """

    def __init__(self, code: str, message: str):
        self.code = code
        self._message = message
        super().__init__(f"{code}: {message}")

    @property
    def message(self) -> str:
        return self._message


class InvalidHarvest(Refused):
    """A harvest request is not a whole number of units within the allowed range."""

    def __init__(self, message: str):
        super().__init__("invalid_harvest", message)


class RoundClosed(Refused):
    """The round (or block, or session) a decision was meant for is not open.

    Codes: ``not_started``, ``session_over``, ``block_over``, ``block_running``,
    ``round_resolved`` (asked for a round already played), ``wrong_round`` (not open yet).
    """


class UnknownGroup(Refused):
    """A group number outside the study's groups."""

    def __init__(self, message: str):
        super().__init__("unknown_group", message)


class UnknownSeat(Refused):
    """A seat number outside the study's seats per group."""

    def __init__(self, message: str):
        super().__init__("unknown_seat", message)


class ServerError(Refused):
    """Something unexpected failed (a locked or full disk, a bug); nothing was stored."""

    def __init__(self) -> None:
        super().__init__(
            "server_error",
            "the server could not handle this just now and stored nothing; send it again in a moment",
        )
