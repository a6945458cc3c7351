"""Pilot export folders shared by the analysis, pool and report tests (built once per run).

Each folder is written the way ``ebbtide pilot`` writes it; the cache makes a
folder a per-session fixture even when several test files ask for it.
"""

from __future__ import annotations

import atexit
import functools
import shutil
import tempfile
from pathlib import Path

from ebbtide.exports.build import tables_from_outcomes
from ebbtide.exports.writer import write_export
from ebbtide.game_logic.pilot import run_pilot
from ebbtide.game_logic.study import load_study, parse_study

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "examples"
_BASE = Path(tempfile.mkdtemp(prefix="ebbtide-analysis-tests-"))
atexit.register(shutil.rmtree, _BASE, ignore_errors=True)

# Invented design without any threshold: one treatment, one block (a robustness case).
NO_THRESHOLD = """
[session]
id = "fennick-open"
title = "Fennick open water, no danger level (invented)"
place = "Fennick (invented)"
[groups]
count = 4
seats_per_group = 3
[resource]
capacity = 100
initial_stock = 80
max_harvest = 8
[threshold]
rule = "none"
[[blocks]]
name = "season"
treatment = "none"
rounds = 8
"""


@functools.cache
def pilot_export(study: str, groups: int, seed: int, strategy: str) -> Path:
    """Folder of a pilot export; ``study`` is an example file name or a TOML text."""
    parsed = parse_study(study) if "\n" in study else load_study(EXAMPLES / study)
    run = run_pilot(parsed, groups=groups, seed=seed, strategy=strategy)
    session_id = f"pilot-{parsed.session.id}-{strategy}-s{seed}"
    tables = tables_from_outcomes(
        parsed, session_id, run.outcomes, lambda o: ["pilot"] * len(o.asked), groups=groups
    )
    out = _BASE / f"{parsed.session.id}-{groups}-{seed}-{strategy}"
    return write_export(out, parsed, session_id, seed, "pilot", tables)


def copy_export(source: Path, destination: Path) -> Path:
    """A writable copy of a cached export folder (tests that alter a folder use this)."""
    shutil.copytree(source, destination)
    return destination
