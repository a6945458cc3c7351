"""Which finished blocks a debrief may show the room before the session has ended.

A debrief reveals a block's hidden danger level. Shown while play goes on, it also
tells the room the hidden value of every block still to be played under the same
level (a fixed threshold is shared by every group; a drawn one is kept across a
group's blocks unless ``threshold.redraw_each_block``). So an early debrief may show a
finished block only if no group will play again under its threshold.
"""

from __future__ import annotations

from collections.abc import Sequence

from .rounds import GroupState, group_threshold
from .study import Study


def blocks_still_to_play(study: Study, state: GroupState) -> range:
    """The group's blocks not yet over: the current one if it is open, and every later one."""
    if state.session_over:
        return range(0)
    first = state.block + 1 if state.block_over else state.block
    return range(first, len(study.blocks))


def thresholds_still_to_play(study: Study, seed: int, groups: Sequence[GroupState]) -> set[float]:
    """Every hidden threshold some group will still play under."""
    found = set()
    for state in groups:
        for block in blocks_still_to_play(study, state):
            level = group_threshold(study, seed, state.group, block)
            if level is not None:
                found.add(level)
    return found


def safe_to_show(threshold: float | None, still_to_play: set[float]) -> bool:
    """A finished block whose danger level (None: there was none) no group plays again."""
    return threshold is None or threshold not in still_to_play
