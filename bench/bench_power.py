"""Time the power analysis and the fitting: simulated studies per second, decisions fitted per second.

Run:  python bench/bench_power.py [--studies 10000] [--groups 20] [--jobs 1] [--fit-groups 240]
Target (issue 14): 10,000 simulated studies of 20 groups within a minute on a laptop.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.fitting import fit_model
from ebbtide.analysis.power import study_power
from ebbtide.exports.build import tables_from_outcomes
from ebbtide.exports.writer import write_export
from ebbtide.game_logic.behaviour import make_model
from ebbtide.game_logic.pilot import run_pilot
from ebbtide.game_logic.study import load_study

ROOT = Path(__file__).resolve().parent.parent


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--study", default=str(ROOT / "examples" / "between-groups.toml"))
    parser.add_argument("--model", default="conditional")
    parser.add_argument("--studies", type=int, default=10_000)
    parser.add_argument("--groups", type=int, default=20)
    parser.add_argument("--jobs", type=int, default=1)
    parser.add_argument("--fit-groups", type=int, default=240)
    args = parser.parse_args()
    study = load_study(args.study)
    model = make_model(args.model, study)
    start = time.perf_counter()
    curve, _ = study_power(study, model, [args.groups], args.studies, jobs=args.jobs, progress=False)
    seconds = time.perf_counter() - start
    print(f"power: {args.studies} studies of {args.groups} groups ({args.model}, {Path(args.study).name}, "
          f"jobs {args.jobs}): {seconds:.1f} s, {args.studies / seconds:.0f} studies/s")

    run = run_pilot(study, args.fit_groups, seed=1, strategy=make_model("threshold-averse", study))
    tables = tables_from_outcomes(study, "bench", run.outcomes, lambda o: ["pilot"] * len(o.asked),
                                  groups=args.fit_groups)
    with tempfile.TemporaryDirectory() as folder:
        data = read_export(write_export(Path(folder) / "x", study, "bench", 1, "pilot", tables))
        start = time.perf_counter()
        fit = fit_model("threshold-averse", data)
        seconds = time.perf_counter() - start
    print(f"fit: threshold-averse on {fit.decisions} decisions of {fit.groups} groups: {seconds:.1f} s")


if __name__ == "__main__":
    main()
