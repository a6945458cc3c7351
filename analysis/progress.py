"""Progress bars for long commands (tqdm): shown on a terminal, quiet when output is piped or logged."""

from __future__ import annotations

import sys

from tqdm import tqdm


def progress_bar(total: int | None, desc: str, unit: str = "step", show: bool | None = None) -> tqdm:
    """A bar on standard error; ``show`` None shows it only when standard error is a terminal.

    tqdm's ``disable=None`` is exactly that rule (quiet on a non-TTY), so a log
    file or a test's captured output never fills with bar redraws.
    """
    return tqdm(total=total, desc=desc, unit=unit, file=sys.stderr, leave=False,
                disable=None if show is None else not show, dynamic_ncols=True)
