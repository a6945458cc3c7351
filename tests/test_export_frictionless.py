"""Every datapackage.json the pilot writes validates with the Frictionless library's validator
(the Data Package and Table Schema standards); a broken table does not."""

from __future__ import annotations

import subprocess
import sys

import frictionless
import pytest
from conftest import ROOT


@pytest.mark.parametrize("study", ["brackwater-demo.toml", "saltmarsh-day"])
def test_pilot_export_validates(tmp_path, study):
    out = tmp_path / "pilot"
    done = subprocess.run(
        [sys.executable, "-m", "ebbtide.server.cli", "pilot", str(ROOT / "examples" / study),
         "--groups", "5", "--out", str(out)], capture_output=True, text=True, timeout=120,
    )
    assert done.returncode == 0, done.stderr
    report = frictionless.validate(out / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    # A harvest that is not a whole number breaks the integer column: the validator must say so.
    decisions = out / "decisions.csv"
    lines = decisions.read_text(encoding="utf-8").splitlines()
    cells = lines[1].split(",")
    cells[7] = "seven"
    decisions.write_text("\n".join([lines[0], ",".join(cells), *lines[2:]]) + "\n", encoding="utf-8")
    broken = frictionless.validate(out / "datapackage.json")
    assert not broken.valid
    assert "type-error" in {error[2] for error in broken.flatten(["rowNumber", "fieldName", "type"])}
