"""Named exceptions of the game core; the shell maps them to clear messages."""

from __future__ import annotations

from typing import Any


class EbbtideError(Exception):
    """Base of every error the core raises on purpose."""


class StudyError(EbbtideError):
    """A study design file is invalid; ``problems`` lists every reason."""

    def __init__(self, problems: list[str]):
        self.problems = list(problems)
        super().__init__("; ".join(self.problems))


class InvalidHarvest(EbbtideError):
    """A harvest request is not a whole number of units within the allowed range."""


class RoundClosed(EbbtideError):
    """The round (or block, or session) a decision was meant for is no longer open."""


class Refused(EbbtideError):
    """A request that will not be carried out; nothing was stored or changed.

    ``code`` is stable (the edges translate it); ``message`` is English and says what was
    wrong and what is allowed.
    """

    def __init__(self, code: str, message: str):
        self.code = code
        self.message = message
        super().__init__(f"{code}: {message}")

    def as_event(self, event: str) -> dict[str, Any]:
        """The body of the ``problem`` event and of a negative acknowledgement."""
        return {"ok": False, "event": event, "code": self.code, "message": self.message}
