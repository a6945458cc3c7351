"""Why the server refused something, said once, sent to the client as an error event.

Every refusal has a stable ``code`` (the phone translates it) and an English
``message`` that says what was wrong and what is allowed. A refused request
changes nothing.
"""

from __future__ import annotations

from typing import Any

from pydantic import ValidationError


class Refused(Exception):
    """A request the server will not carry out; nothing was stored or changed."""

    def __init__(self, code: str, message: str):
        self.code = code
        self.message = message
        super().__init__(f"{code}: {message}")

    def as_event(self, event: str) -> dict[str, Any]:
        """The body of the ``problem`` event and of a negative acknowledgement."""
        return {"ok": False, "event": event, "code": self.code, "message": self.message}


def from_validation_error(exc: ValidationError) -> Refused:
    """Turn pydantic's report on a bad socket payload into one readable refusal."""
    parts = []
    for error in exc.errors():
        key = ".".join(str(p) for p in error["loc"]) or "payload"
        if error["type"] == "extra_forbidden":
            parts.append(f"{key}: unknown field")
        elif error["type"] == "missing":
            parts.append(f"{key}: required field is missing")
        else:
            parts.append(f"{key}: {error['msg']}")
    return Refused("bad_request", "; ".join(parts))
