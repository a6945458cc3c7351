"""The ``ebbtide`` command: parses arguments and calls into the project, nothing more."""

from __future__ import annotations

import sys
from collections.abc import Callable
from pathlib import Path

import click

from ebbtide.game_logic.errors import StudyError
from ebbtide.game_logic.study import Study, load_study
from ebbtide.server.resources import example_study

DEMO_STUDY_FILE = "brackwater-demo.toml"


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
@click.argument("study_file", type=click.Path())
def check(study_file: str) -> None:
    """Validate STUDY_FILE (a TOML file, or a study folder holding study.toml, its pictures
    and sounds) and print a one-screen summary of the design."""
    from ebbtide.game_logic.design_review import design_summary, design_warnings
    from ebbtide.game_logic.field_day_spec import day_plan, missing_media

    study = _load(study_file)
    missing = missing_media(study, study.folder)
    if missing:
        click.echo(f"{study_file}: {len(missing)} picture or sound file(s) named by the study are missing "
                   f"from {study.folder}:", err=True)
        for name in missing:
            click.echo(f"  - {name}", err=True)
        sys.exit(2)
    for line in design_summary(study):
        click.echo(line)
    clock = 0.0
    click.echo("plan of the day (minutes from the start):")
    for stage, minutes in day_plan(study):
        if minutes:
            click.echo(f"  {clock:5.0f}-{clock + minutes:<5.0f} {stage}")
            clock += minutes
    warnings = design_warnings(study)
    for warning in warnings:
        click.echo(f"warning: {warning}")
    click.echo("ok: the design is valid" + (f" ({len(warnings)} warning(s))" if warnings else ""))


@main.command()
@click.argument("study_file", type=click.Path())
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
    from ebbtide.exports.build import tables_from_outcomes
    from ebbtide.exports.writer import write_export
    from ebbtide.game_logic.pilot import run_pilot

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
    from ebbtide.analysis.pool import pool_exports
    from ebbtide.game_logic.errors import EbbtideError

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
    from ebbtide.analysis.report import write_report
    from ebbtide.game_logic.errors import EbbtideError

    try:
        written = write_report(folder, out_file, seed=seed)
    except EbbtideError as exc:
        click.echo(f"report not written: {exc}", err=True)
        sys.exit(2)
    click.echo(f"wrote {written.html} and {len(written.tables)} table(s) as CSV next to it")


def _announce(app, host: str, db_path: Path, created: bool) -> Callable[[int], None]:
    from ebbtide.server.netaddr import reachable_host

    def announce(port: int) -> None:
        base = f"http://{reachable_host(host)}:{port}"
        app.config["EBBTIDE_PUBLIC_URL"] = base
        pin = app.config.get("EBBTIDE_PIN")
        state = "new session" if created else "resumed session"
        click.echo(f"Ebbtide: {state} {app.config['EBBTIDE_SESSION_ID']}")
        click.echo(f"  console:        {base}/console")
        kept = "unchanged (set when the session was created)"
        click.echo(f"  console PIN:    {pin or kept}")
        click.echo(f"  seat cards:     {base}/console/cards")
        click.echo(f"  phones join at: {base}/play")
        click.echo(f"  database:       {db_path}")
        click.echo("Stop with Ctrl+C; start again on the same database to resume where it was.", nl=True)
        sys.stdout.flush()

    return announce


def _run_session(
    study: Study, db_path: Path, host: str, port: int, seed: int | None, pin: str | None
) -> None:
    from ebbtide.game_logic.errors import Refused
    from ebbtide.server import create_app
    from ebbtide.server.serving import serve as serve_forever

    config = {"EBBTIDE_DB": str(db_path), "EBBTIDE_STUDY": study, "EBBTIDE_SEED": seed, "EBBTIDE_PIN": pin}
    try:
        app = create_app(config)
    except Refused as exc:
        click.echo(f"cannot start: {exc.message}", err=True)
        sys.exit(2)
    created = app.config.get("EBBTIDE_PIN") is not None
    try:
        serve_forever(app, host, port, _announce(app, host, db_path, created))
    except OSError as exc:
        click.echo(f"cannot listen on {host}:{port}: {exc.strerror}; choose another --port", err=True)
        sys.exit(2)


_HOST = click.option("--host", default="0.0.0.0", show_default=True,
                     help="Address to listen on; the default lets phones on the router join.")
_PORT = click.option("--port", type=click.IntRange(0, 65535), default=8750, show_default=True,
                     help="Port to listen on (0 picks a free one).")


@main.command()
@click.argument("study_file", type=click.Path())
@click.option("--db", "db_path", type=click.Path(dir_okay=False), default=None,
              help="SQLite file of the session [default: SESSION-ID.db in this folder].")
@_HOST
@_PORT
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=None,
              help="Seed of every random draw [default: a fresh random seed, stored].")
@click.option("--pin", type=click.STRING, default=None,
              help="Console PIN, 4 to 12 digits [default: six random digits, printed].")
def serve(
    study_file: str, db_path: str | None, host: str, port: int, seed: int | None, pin: str | None
) -> None:
    """Run a live session of STUDY_FILE; on the same database it resumes where it was."""
    if pin is not None and not (pin.isdigit() and 4 <= len(pin) <= 12):
        click.echo(f"--pin holds {pin!r}; allowed: 4 to 12 digits", err=True)
        sys.exit(2)
    study = _load(study_file)
    path = Path(db_path) if db_path else Path.cwd() / f"{study.session.id}.db"
    _run_session(study, path.resolve(), host, port, seed, pin)


@main.command()
@_HOST
@_PORT
def demo(host: str, port: int) -> None:
    """Start the built-in demo session (2 groups of 2 seats) on a fresh database in a temp folder."""
    import tempfile

    study = _load(str(example_study(DEMO_STUDY_FILE)))
    folder = Path(tempfile.mkdtemp(prefix="ebbtide-demo-"))
    _run_session(study, folder / "demo.db", host, port, None, None)


@main.command()
@click.argument("db_path", type=click.Path(exists=True, dir_okay=False))
@click.option("--out", "out_dir", type=click.Path(file_okay=False), required=True,
              help="Folder for the tables; one subfolder per session when the database holds several.")
@click.option("--stata", is_flag=True, help="Also write each table as a Stata .dta file.")
def export(db_path: str, out_dir: str, stata: bool) -> None:
    """Write the export tables of every session stored in DB_PATH."""
    from ebbtide.analysis.pool import write_stata
    from ebbtide.server.store.export import export_database

    folders = export_database(db_path, out_dir)
    if not folders:
        click.echo(f"{db_path} holds no session; nothing written", err=True)
        sys.exit(1)
    for folder in folders:
        extra = ""
        if stata:
            write_stata(folder)
            extra = " and .dta"
        click.echo(f"wrote {folder}/decisions.csv, rounds.csv, seats.csv, surveys.csv, timeline.csv{extra}, "
                   "datapackage.json")


@main.command()
@click.argument("db_path", type=click.Path(exists=True, dir_okay=False))
@click.option("--url", required=True, help="Address of the running session, e.g. http://127.0.0.1:8750.")
@click.option("--strategy", type=click.Choice(["max", "sustainable", "conditional"]),
              default="conditional", show_default=True, help="How the bots harvest.")
@click.option("--groups", "group_codes", default="",
              help="Comma-separated group codes the bots play (e.g. G01,G02) [default: every group].")
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=1, show_default=True,
              help="Seed of the bots' own noise and thinking times.")
@click.option("--minutes", type=click.FloatRange(0.1, 600), default=30, show_default=True,
              help="Stop after this long even if the session has not ended.")
def rehearse(db_path: str, url: str, strategy: str, group_codes: str, seed: int,
             minutes: float) -> None:
    """Rehearsal: bots play seats of the session in DB_PATH served at --url.

    Pace the session from the console as usual; bots answer every round they are shown.
    """
    from ebbtide.exports.tables import group_code
    from ebbtide.game_logic.study import parse_study
    from ebbtide.server.rehearsal import rehearse as play
    from ebbtide.server.store import Store

    with Store(db_path) as store:
        records = store.sessions()
        if not records:
            click.echo(f"{db_path} holds no session", err=True)
            sys.exit(2)
        record = records[-1]
        keys = store.seat_keys(record.session_id)
    study = parse_study(record.study_text)
    wanted = {c.strip().upper() for c in group_codes.split(",") if c.strip()}
    known = {group_code(k.group) for k in keys}
    if wanted - known:
        click.echo(f"--groups names {sorted(wanted - known)}; allowed: {sorted(known)}", err=True)
        sys.exit(2)
    chosen = [k for k in keys if not wanted or group_code(k.group) in wanted]
    click.echo(f"rehearsal: {len(chosen)} bot(s) on {record.session_id} at {url}; "
               "start and pace the session from the console")
    result = play(url, study, chosen, strategy=strategy, seed=seed, max_seconds=minutes * 60)
    click.echo(f"{result.acknowledged} decision(s) acknowledged, {result.refused} refused, "
               f"in {result.seconds:.0f} s; session {'ended' if result.finished else 'still running'}")


if __name__ == "__main__":
    main()
