"""Slow down guessing: after a few failures a client waits, longer each time."""

from __future__ import annotations

import threading
from dataclasses import dataclass


@dataclass
class _Record:
    failures: int = 0
    locked_until: float = 0.0


class FailureLimiter:
    """Counts failed attempts per key (a client address); ``now`` comes from the caller."""

    def __init__(self, free_attempts: int = 5, first_wait: float = 30.0, max_wait: float = 900.0):
        self.free_attempts = free_attempts
        self.first_wait = first_wait
        self.max_wait = max_wait
        self._records: dict[str, _Record] = {}
        self._lock = threading.Lock()

    def wait_seconds(self, key: str, now: float) -> float:
        """Seconds until ``key`` may try again (0 when it may try now)."""
        with self._lock:
            record = self._records.get(key)
            return 0.0 if record is None else max(0.0, record.locked_until - now)

    def failed(self, key: str, now: float) -> None:
        with self._lock:
            record = self._records.setdefault(key, _Record())
            record.failures += 1
            extra = record.failures - self.free_attempts
            if extra >= 0:
                record.locked_until = now + min(self.max_wait, self.first_wait * 2**extra)

    def succeeded(self, key: str) -> None:
        with self._lock:
            self._records.pop(key, None)
