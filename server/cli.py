"""The ``ebbtide`` command: parses arguments and calls into the project, nothing more."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from game_logic.errors import StudyError
from game_logic.study import Study, load_study

ROOT = Path(__file__).resolve().parent.parent
DEMO_STUDY = ROOT / "examples" / "brackwater-demo.toml"


def _load(path: str) -> Study:
    try:
        return load_study(path)
    except StudyError as exc:
        click.echo(f"{path}: the study file has {len(exc.problems)} problem(s):", err=True)
        for problem in exc.problems:
            click.echo(f"  - {problem}", err=True)
        sys.exit(2)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="ebbtide")
def main() -> None:
    """Ebbtide: threshold-risk harvest games for field sessions, teaching and analysis."""


@main.command()
@click.argument("study_file", type=click.Path(dir_okay=False))
def check(study_file: str) -> None:
    """Validate STUDY_FILE and print a one-screen summary of the design."""
    from game_logic.design_review import design_summary, design_warnings

    study = _load(study_file)
    for line in design_summary(study):
        click.echo(line)
    warnings = design_warnings(study)
    for warning in warnings:
        click.echo(f"warning: {warning}")
    click.echo("ok: the design is valid" + (f" ({len(warnings)} warning(s))" if warnings else ""))


@main.command()
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option("--groups", type=click.IntRange(1, 100_000), default=200, show_default=True,
              help="Simulated groups to play through the design.")
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=1, show_default=True,
              help="Seed of every random draw (thresholds, flips, stops, player noise).")
@click.option("--strategy", type=click.Choice(["max", "sustainable", "conditional"]),
              default="conditional", show_default=True, help="How the simulated players harvest.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), required=True,
              help="Folder for decisions.csv, rounds.csv, seats.csv and datapackage.json.")
def pilot(study_file: str, groups: int, seed: int, strategy: str, out_dir: str) -> None:
    """Simulate groups offline through STUDY_FILE and write the export tables."""
    from exports.build import tables_from_outcomes
    from exports.writer import write_export
    from game_logic.pilot import run_pilot

    study = _load(study_file)
    run = run_pilot(study, groups=groups, seed=seed, strategy=strategy)
    session_id = f"pilot-{study.session.id}-{strategy}-s{seed}"
    tables = tables_from_outcomes(
        study, session_id, run.outcomes, lambda o: ["pilot"] * len(o.asked), groups=groups
    )
    write_export(out_dir, study, session_id, seed, "pilot", tables)
    rounds = tables["rounds"]
    ever_crossed = {r["group_id"] for r in rounds if r["crossed"]}
    click.echo(
        f"pilot: {groups} groups, strategy {strategy}, {len(rounds)} group-rounds; "
        f"{len(ever_crossed)} group(s) crossed the threshold at least once"
    )
    click.echo(f"wrote {out_dir}/decisions.csv, rounds.csv, seats.csv, datapackage.json")


@main.command()
@click.argument("folders", nargs=-1, required=True, type=click.Path())
@click.option("--out", "out_dir", type=click.Path(file_okay=False), required=True,
              help="Folder for the pooled decisions.csv, rounds.csv, seats.csv and datapackage.json.")
@click.option("--stata", is_flag=True, help="Also write each table as a Stata .dta file.")
def pool(folders: tuple[str, ...], out_dir: str, stata: bool) -> None:
    """Merge the export folders FOLDERS of many sessions into one pooled folder."""
    from analysis.pool import pool_exports
    from game_logic.errors import EbbtideError

    try:
        result = pool_exports(folders, out_dir, stata=stata)
    except EbbtideError as exc:
        click.echo(f"pool refused, nothing written: {exc}", err=True)
        sys.exit(2)
    for note in result.notes:
        click.echo(f"note: {note}")
    click.echo(f"pooled {len(result.session_ids)} session(s) into {result.out}"
               + (" (with Stata .dta files)" if stata else ""))


@main.command()
@click.argument("folder", type=click.Path())
@click.option("--out", "out_file", type=click.Path(dir_okay=False), required=True,
              help="The HTML report to write; its tables go next to it as CSV files.")
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=1, show_default=True,
              help="Seed of the resampling (bootstrap, permutation test, selfish benchmark).")
def report(folder: str, out_file: str, seed: int) -> None:
    """Write a self-contained HTML analysis report of the export FOLDER."""
    from analysis.report import write_report
    from game_logic.errors import EbbtideError

    try:
        written = write_report(folder, out_file, seed=seed)
    except EbbtideError as exc:
        click.echo(f"report not written: {exc}", err=True)
        sys.exit(2)
    click.echo(f"wrote {written.html} and {len(written.tables)} table(s) as CSV next to it")


if __name__ == "__main__":
    main()
