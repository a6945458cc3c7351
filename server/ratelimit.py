"""Slow down guessing: after a few failures a client waits, longer each time; failures fade slowly.

``now`` always comes from the caller (monotonic seconds), so tests need no clock tricks.
"""

from __future__ import annotations

import threading
from collections import deque
from dataclasses import dataclass

MAX_RECORDS = 4096  # forgotten (fully faded, unlocked) clients are dropped beyond this


@dataclass
class _Record:
    failures: int = 0
    updated: float = 0.0  # when the last failure faded (or the first was counted)
    locked_until: float = 0.0


class FailureLimiter:
    """Counts failed attempts per key (an address, a device).

    Five free failures, then a wait of ``first_wait`` seconds doubling up to ``max_wait``.
    One failure fades every ``fade_seconds``: a success does not wipe the count, so mixing
    one's own code into a stream of guesses buys nothing.
    """

    def __init__(self, free_attempts: int = 5, first_wait: float = 30.0, max_wait: float = 900.0,
                 fade_seconds: float = 600.0):
        self.free_attempts = free_attempts
        self.first_wait = first_wait
        self.max_wait = max_wait
        self.fade_seconds = fade_seconds
        self._records: dict[str, _Record] = {}
        self._lock = threading.Lock()

    def wait_seconds(self, key: str, now: float) -> float:
        """Seconds until ``key`` may try again (0 when it may try now)."""
        with self._lock:
            record = self._records.get(key)
            return 0.0 if record is None else max(0.0, record.locked_until - now)

    def failed(self, key: str, now: float) -> None:
        with self._lock:
            if key not in self._records and len(self._records) >= MAX_RECORDS:
                self._forget_faded(now)
            record = self._records.setdefault(key, _Record(updated=now))
            self._fade(record, now)
            if record.failures == 0:
                record.updated = now
            record.failures += 1
            extra = record.failures - self.free_attempts
            if extra >= 0:
                record.locked_until = now + min(self.max_wait, self.first_wait * 2**extra)

    def succeeded(self, key: str) -> None:
        """Forget ``key`` (the console PIN only: whoever knows the PIN has nothing left to guess)."""
        with self._lock:
            self._records.pop(key, None)

    def slowed(self, now: float) -> int:
        """How many keys are waiting right now."""
        with self._lock:
            return sum(1 for r in self._records.values() if r.locked_until > now)

    def _fade(self, record: _Record, now: float) -> None:
        """One failure fades per whole ``fade_seconds`` since the last one faded."""
        steps = int((now - record.updated) // self.fade_seconds)
        if steps > 0:
            record.failures = max(0, record.failures - steps)
            record.updated += steps * self.fade_seconds

    def _forget_faded(self, now: float) -> None:
        for key, record in list(self._records.items()):
            self._fade(record, now)
            if record.failures == 0 and record.locked_until <= now:
                del self._records[key]


class FailureBudget:
    """Failures allowed to everyone together within a sliding window: holds against many addresses."""

    def __init__(self, per_window: int = 30, window: float = 60.0, remember: float = 600.0):
        self.per_window = per_window
        self.window = window
        self.remember = remember
        self._times: deque[float] = deque()
        self._lock = threading.Lock()

    def wait_seconds(self, now: float) -> float:
        with self._lock:
            recent = [t for t in self._times if now - t < self.window]
            if len(recent) < self.per_window:
                return 0.0
            return self.window - (now - recent[-self.per_window])

    def failed(self, now: float) -> None:
        with self._lock:
            self._times.append(now)
            while self._times and now - self._times[0] > self.remember:
                self._times.popleft()

    def count(self, now: float, seconds: float) -> int:
        with self._lock:
            return sum(1 for t in self._times if now - t <= seconds)


class CodeGuard:
    """The typed seat code's limits: per address, per device, and one budget for everyone.

    ``report`` tells the console when guessing is seen: somebody is being slowed down, or
    the budget ran out.
    """

    REPORT_MINUTES = 10

    def __init__(self, per_client: FailureLimiter | None = None, budget: FailureBudget | None = None):
        self.per_client = per_client or FailureLimiter()
        self.budget = budget or FailureBudget()

    def wait_seconds(self, keys: list[str], now: float) -> float:
        waits = [self.per_client.wait_seconds(k, now) for k in keys]
        return max([self.budget.wait_seconds(now), *waits])

    def failed(self, keys: list[str], now: float) -> None:
        for key in keys:
            self.per_client.failed(key, now)
        self.budget.failed(now)

    def report(self, now: float) -> dict | None:
        slowed = self.per_client.slowed(now)
        if not slowed and not self.budget.wait_seconds(now):
            return None
        return {"wrong_codes": self.budget.count(now, self.REPORT_MINUTES * 60),
                "minutes": self.REPORT_MINUTES, "slowed": slowed}
