"""The ``ebbtide`` command: parses arguments and calls into the project, nothing more."""

from __future__ import annotations

import sys

# First, before Flask or anything else is imported: a serving process patches for gevent.
from ebbtide.server.serving import prepare_process

prepare_process(sys.argv)

from collections.abc import Callable  # noqa: E402
from pathlib import Path  # noqa: E402

import click  # noqa: E402
import numpy as np  # noqa: E402

from ebbtide.game_logic.behaviour import MODEL_NAMES  # noqa: E402
from ebbtide.game_logic.errors import EbbtideError, StudyError  # noqa: E402
from ebbtide.game_logic.study import Study, load_study  # noqa: E402
from ebbtide.server.resources import example_study  # noqa: E402

DEMO_STUDY_FILE = "brackwater-demo.toml"

_MODEL_FILE = click.option(
    "--model", "model_spec", default=None, metavar="NAME|FILE",
    help="Behaviour model by name, or a parameter file written by `ebbtide fit` (overrides --strategy).")


def _model(spec: str, study: Study):
    from ebbtide.game_logic.behaviour import load_model

    try:
        return load_model(spec, study)
    except ValueError as exc:
        click.echo(str(exc), err=True)
        sys.exit(2)


def _load(path: str) -> Study:
    try:
        return load_study(path)
    except (UnicodeDecodeError, ValueError) as exc:
        # A binary or non-UTF-8 file: the study reader only knows text.
        click.echo(f"{path}: not a study file ({exc.__class__.__name__}); allowed: a UTF-8 TOML text file",
                   err=True)
        sys.exit(2)
    except StudyError as exc:
        click.echo(f"{path}: the study file has {len(exc.problems)} problem(s):", err=True)
        for problem in exc.problems:
            click.echo(f"  - {problem}", err=True)
        sys.exit(2)


class _Commands(click.Group):
    """Every named error that reaches the command line becomes one line and exit code 2."""

    def invoke(self, ctx: click.Context):
        try:
            return super().invoke(ctx)
        except EbbtideError as exc:
            click.echo(f"{ctx.invoked_subcommand or 'ebbtide'}: {exc.message} [{exc.code}]", err=True)
            sys.exit(2)


@click.group(cls=_Commands, context_settings={"help_option_names": ["-h", "--help"]})
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
@click.option("--strategy", type=click.Choice(["max", *MODEL_NAMES]),
              default="conditional", show_default=True,
              help="Behaviour model of the simulated players (docs/behaviour-models.md).")
@_MODEL_FILE
@click.option("--out", "out_dir", type=click.Path(file_okay=False), required=True,
              help="Folder for decisions.csv, rounds.csv, seats.csv and datapackage.json.")
def pilot(study_file: str, groups: int, seed: int, strategy: str, model_spec: str | None,
          out_dir: str) -> None:
    """Simulate groups offline through STUDY_FILE and write the export tables."""
    from ebbtide.analysis.progress import progress_bar
    from ebbtide.exports.build import StreamedExport
    from ebbtide.game_logic.pilot import stream_pilot

    study = _load(study_file)
    model = _model(model_spec or strategy, study)
    strategy = model.name
    session_id = f"pilot-{study.session.id}-{strategy}-s{seed}"
    # Rows go to disk as the groups play: a large pilot never holds its decisions in memory.
    export = StreamedExport(out_dir, study, session_id, groups=groups)
    sources = ["pilot"] * study.seats
    ever_crossed: set[int] = set()
    group_rounds = 0

    def write(outcome) -> None:
        nonlocal group_rounds
        export.add(outcome, sources)
        group_rounds += 1
        if outcome.crossed:
            ever_crossed.add(outcome.group)

    # One step per planned round of play (blocks that end early jump ahead), one to write.
    with progress_bar(study.total_rounds + 1, "pilot: playing", "round") as bar:
        starts = [sum(b.rounds for b in study.blocks[:i]) for i in range(len(study.blocks))]
        stream_pilot(study, groups, seed, model, write,
                     on_round=lambda step: bar.update(starts[step.block] + step.round - bar.n))
        bar.set_description("pilot: writing")
        bar.update(study.total_rounds - bar.n)
        export.finish(seed, "pilot")
        bar.update(1)
    click.echo(
        f"pilot: {groups} groups, strategy {strategy}, {group_rounds} group-rounds; "
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
@click.option("--plan", "plan_file", type=click.Path(dir_okay=False), default=None,
              help="Pre-analysis plan written by `ebbtide plan`: label tests confirmatory or exploratory.")
@click.option("--by-design", is_flag=True,
              help="For a pool of several study designs: compute every table and test within each design.")
def report(folder: str, out_file: str, seed: int, plan_file: str | None, by_design: bool) -> None:
    """Write a self-contained HTML analysis report of the export FOLDER."""
    from ebbtide.analysis.plan import read_plan
    from ebbtide.analysis.report import write_report

    try:
        plan = read_plan(plan_file) if plan_file else None
        written = write_report(folder, out_file, seed=seed, plan=plan, by_design=by_design)
    except (EbbtideError, ValueError) as exc:
        click.echo(f"report not written: {exc}", err=True)
        sys.exit(2)
    click.echo(f"wrote {written.html} and {len(written.tables)} table(s) as CSV next to it")


@main.command()
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option("--model", "model_spec", default="threshold-averse", show_default=True, metavar="NAME|FILE",
              help="Behaviour model by name, or a parameter file written by `ebbtide fit`.")
@click.option("--groups", "group_text", default="4:40", show_default=True,
              help="Numbers of groups to try: START:STOP, START:STOP:STEP or a list like 6,12,18.")
@click.option("--sims", type=click.IntRange(10, 1_000_000), default=1000, show_default=True,
              help="Simulated studies per number of groups.")
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=1, show_default=True,
              help="Seed of every simulated draw.")
@click.option("--outcome", type=click.Choice(["group_harvest_per_round", "share_degraded", "crossed",
                                              "final_stock"]),
              default="group_harvest_per_round", show_default=True, help="The group-level outcome tested.")
@click.option("--level", type=click.FloatRange(0.001, 0.5), default=0.05, show_default=True,
              help="Significance level of each planned test.")
@click.option("--jobs", type=click.IntRange(1, 64), default=1, show_default=True,
              help="Processes to simulate with.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), required=True,
              help="Folder for power.csv, power-curve.png and power-curve.svg.")
def power(study_file: str, model_spec: str, group_text: str, sims: int, seed: int, outcome: str,
          level: float, jobs: int, out_dir: str) -> None:
    """Power by simulation: how many groups the planned comparisons of STUDY_FILE need."""
    import csv

    from ebbtide.analysis.power import draw_power_curve, parse_group_counts, study_power

    study = _load(study_file)
    model = _model(model_spec, study)
    try:
        counts = parse_group_counts(group_text)
        curve, hypotheses = study_power(study, model, counts, sims, seed=seed, outcome=outcome,
                                        level=level, jobs=jobs)
    except ValueError as exc:
        click.echo(f"power not estimated: {exc}", err=True)
        sys.exit(2)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    with open(out / "power.csv", "w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(curve.rows()[0]))
        writer.writeheader()
        writer.writerows(curve.rows())
    figures = draw_power_curve(curve, str(out / "power-curve"))
    click.echo(f"power by simulation: model {model.name} {model.parameters or ''}, {sims} studies per "
               f"number of groups, seed {seed}; each test at level {level:g}, two-sided")
    se = curve.standard_error
    for j, h in enumerate(hypotheses):
        click.echo(f"{h.label}")
        click.echo("  groups  power  (Monte Carlo s.e.)")
        for i, n in enumerate(curve.groups):
            p = curve.power[i, j]
            shown = "  too few groups in an arm" if np.isnan(p) else f"  {p:5.3f}  ({se[i, j]:.3f})"
            click.echo(f"  {n:6d}{shown}")
    for h, n in zip(hypotheses, curve.groups_for(0.8), strict=True):
        reach = f"{n} groups" if n else f"not reached with {curve.groups[-1]} groups"
        click.echo(f"80 % power: {reach} for {h.label}")
    click.echo("A simulation under an assumed behaviour model, not a forecast: fit the model to a pilot "
               "session (ebbtide fit) before trusting these numbers.")
    click.echo(f"wrote {out / 'power.csv'}, " + ", ".join(figures))


@main.command()
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option("--out", "out_file", type=click.Path(dir_okay=False), required=True,
              help="The plan file to write (TOML).")
@click.option("--groups", type=click.IntRange(2, 100_000), default=None,
              help="Groups planned over every session [default: the study's group count].")
@click.option("--power", "power_file", type=click.Path(dir_okay=False), default=None,
              help="power.csv written by `ebbtide power` [default: a small simulation with --model].")
@click.option("--model", "model_spec", default="threshold-averse", show_default=True, metavar="NAME|FILE",
              help="Behaviour model of the small power simulation (ignored with --power).")
@click.option("--sims", type=click.IntRange(10, 100_000), default=400, show_default=True,
              help="Simulated studies of the small power simulation.")
@click.option("--outcome", type=click.Choice(["group_harvest_per_round", "share_degraded", "crossed",
                                              "final_stock"]),
              default="group_harvest_per_round", show_default=True, help="The group-level outcome tested.")
@click.option("--level", type=click.FloatRange(0.001, 0.5), default=0.05, show_default=True,
              help="Significance level of each planned test.")
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=1, show_default=True,
              help="Seed of the power simulation.")
def plan(study_file: str, out_file: str, groups: int | None, power_file: str | None, model_spec: str,
         sims: int, outcome: str, level: float, seed: int) -> None:
    """Write a pre-analysis plan of STUDY_FILE: planned comparisons, groups and power, hashed and dated."""
    from datetime import UTC, datetime

    from ebbtide.analysis.plan import make_plan, plan_summary, plan_text, power_from_file
    from ebbtide.analysis.power import study_power

    study = _load(study_file)
    planned_groups = groups or study.groups.count
    try:
        if power_file:
            power, source = power_from_file(power_file, planned_groups), f"file {Path(power_file).name}"
        else:
            model = _model(model_spec, study)
            curve, hypotheses = study_power(study, model, [planned_groups], sims, seed=seed, outcome=outcome,
                                            level=level, progress=False)
            power = {h.label: (float(curve.power[0, j]), float(curve.standard_error[0, j]))
                     for j, h in enumerate(hypotheses)}
            source = f"simulation: model {model.name}, {sims} studies, seed {seed}"
        created = datetime.now(UTC).replace(microsecond=0).isoformat()
        made = make_plan(study, created, planned_groups, power, source, outcome=outcome, level=level)
    except ValueError as exc:
        click.echo(f"plan not written: {exc}", err=True)
        sys.exit(2)
    try:
        Path(out_file).write_text(plan_text(made), encoding="utf-8")
    except OSError as exc:
        click.echo(f"--out {out_file}: cannot be written ({exc.strerror}); allowed: a file path in a "
                   "writable folder", err=True)
        sys.exit(2)
    for line in plan_summary(made):
        click.echo(line)
    click.echo(f"wrote {out_file}; keep it with the study file and give it to `ebbtide report --plan`")


@main.command()
@click.argument("export_dir", type=click.Path(file_okay=False))
@click.option("--model", "model_name", type=click.Choice(["conditional", "logit", "threshold-averse"]),
              required=True, help="The behaviour model to estimate (docs/behaviour-models.md).")
@click.option("--out", "out_file", type=click.Path(dir_okay=False), required=True,
              help="Parameter file to write (TOML), for pilot, rehearse, power and preview --model.")
def fit(export_dir: str, model_name: str, out_file: str) -> None:
    """Estimate a behaviour model from the decisions in EXPORT_DIR by maximum likelihood."""
    from ebbtide.analysis.exports_reader import read_export
    from ebbtide.analysis.fitting import fit_model
    from ebbtide.game_logic.behaviour import parameter_file_text
    from ebbtide.game_logic.errors import EbbtideError

    try:
        result = fit_model(model_name, read_export(export_dir))
    except (EbbtideError, ValueError) as exc:
        click.echo(f"fit refused, nothing written: {exc}", err=True)
        sys.exit(2)
    for line in result.summary():
        click.echo(line)
    text = parameter_file_text(model_name, {**result.fixed, **result.estimates}, **result.parameter_tables())
    Path(out_file).write_text(text, encoding="utf-8")
    click.echo(f"wrote {out_file}; use it with --model {out_file}")


@main.command()
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option("--model", "model_specs", multiple=True, metavar="NAME|FILE",
              help="Behaviour model (repeatable) [default: every model].")
@click.option("--sessions", type=click.IntRange(10, 100_000), default=1000, show_default=True,
              help="Simulated sessions per model.")
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=1, show_default=True,
              help="Seed of every simulated draw.")
@click.option("--html", "html_file", type=click.Path(dir_okay=False), default=None,
              help="Also write the design preview as one self-contained HTML page (figures, phones).")
@click.option("--power-model", "power_spec", default="threshold-averse", show_default=True,
              metavar="NAME|FILE",
              help="Behaviour model of the page's quick power curve.")
@click.option("--power-sims", type=click.IntRange(10, 100_000), default=100, show_default=True,
              help="Simulated studies per point of the page's quick power curve.")
def preview(study_file: str, model_specs: tuple[str, ...], sessions: int, seed: int, html_file: str | None,
            power_spec: str, power_sims: int) -> None:
    """Cash to carry and length of the day for STUDY_FILE, from simulated sessions (--html: a whole page)."""
    from ebbtide.game_logic.behaviour import MODEL_NAMES
    from ebbtide.game_logic.budget import cash_budget
    from ebbtide.game_logic.design_review import expected_minutes

    def cash(amount) -> str:
        return format(amount.normalize(), "f")  # 560, not 560.0 or 5.6E+2

    study = _load(study_file)
    models = [_model(spec, study) for spec in (model_specs or MODEL_NAMES)]
    currency = study.payment.currency
    people = study.groups.count * study.seats
    click.echo(f"{study.session.title}: {study.groups.count} groups x {study.seats} seats = {people} "
               f"people; {sessions} simulated sessions per model, seed {seed}")
    budgets = []
    for model in models:
        b = cash_budget(study, model, sessions=sessions, seed=seed)
        budgets.append(b)
        click.echo(f"cash under {model.name}: {cash(b.expected)} {currency} expected, {cash(b.minimum)} "
                   f"to {cash(b.maximum)}; bring {cash(b.high)} for {b.quantile:.0%} of sessions")
        if b.minimum == b.maximum:
            click.echo(f"  every session under {model.name}: {cash(b.minimum)} {currency}")
        packing = ", ".join(f"{k} x {cash(v)}" for v, k in b.packing.items())
        click.echo(f"  notes and coins ({b.quantile:.0%} of sessions, each value alone): {packing}")
        click.echo(f"  day under {model.name}: median {np.median(b.minutes):.0f} minutes, "
                   f"95 % within {np.quantile(b.minutes, 0.95):.0f}")
    click.echo(f"duration: {expected_minutes(study):.0f} minutes if every round is played (setup, rounds, "
               "talk pauses, debrief)")
    click.echo("Simulated under assumed behaviour, not a forecast; payments are real money: carry a margin "
               "and follow your institution's rules for cash.")
    if html_file:
        from ebbtide.server.design_preview import write_preview

        try:
            written = write_preview(html_file, study, models, _model(power_spec, study), seed=seed,
                                    sessions=sessions, power_sims=power_sims, budgets=budgets)
        except OSError as exc:
            click.echo(f"--html {html_file}: cannot be written ({exc.strerror}); allowed: a file path in a "
                       "writable folder", err=True)
            sys.exit(2)
        click.echo(f"wrote {written}")


# What ``serve`` says it did on start-up, by ``Opening.how`` (server/registry.py).
OPENED_WORDS = {
    "new": "new session",
    "resumed": "resumed session",
    "reopened": "reopened session, which has ended (read-only: nothing more can be played; "
                "payment sheet, debrief, reveal and export are available)",
}


def _announce(app, host: str, db_path: Path) -> Callable[[int], None]:
    from ebbtide.server.netaddr import reachable_host

    def announce(port: int) -> None:
        base = f"http://{reachable_host(host)}:{port}"
        app.config["EBBTIDE_PUBLIC_URL"] = base
        pin = app.config.get("EBBTIDE_PIN")
        how = app.config["EBBTIDE_OPENED"]
        click.echo(f"Ebbtide: {OPENED_WORDS[how]} {app.config['EBBTIDE_SESSION_ID']}")
        click.echo(f"  console:        {base}/console")
        kept = "unchanged (set when the session was created)"
        click.echo(f"  console PIN:    {pin or kept}")
        click.echo(f"  seat cards:     {base}/console/cards")
        click.echo(f"  phones join at: {base}/play")
        click.echo(f"  database:       {db_path}")
        if how == "reopened":
            click.echo("To play this study again, start with --new-session (a new PIN and new seat cards).")
        click.echo("Stop with Ctrl+C; start again on the same database to resume where it was.", nl=True)
        sys.stdout.flush()

    return announce


def _run_session(
    study: Study, db_path: Path, host: str, port: int, seed: int | None, pin: str | None,
    new_session: bool = False,
) -> None:
    from ebbtide.server import create_app
    from ebbtide.server.serving import serve as serve_forever

    _refuse_damaged_database(db_path)
    config = {"EBBTIDE_DB": str(db_path), "EBBTIDE_STUDY": study, "EBBTIDE_SEED": seed,
              "EBBTIDE_PIN": pin, "EBBTIDE_NEW_SESSION": new_session}
    try:
        app = create_app(config)
    except EbbtideError as exc:
        click.echo(f"cannot start: {exc.message}", err=True)
        sys.exit(2)
    try:
        serve_forever(app, host, port, _announce(app, host, db_path))
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
@click.option("--new-session", is_flag=True,
              help="Start a new session (new PIN, new seat cards) even if the database holds one "
                   "of this study; without it the latest one is resumed, or reopened if it has ended.")
def serve(
    study_file: str, db_path: str | None, host: str, port: int, seed: int | None, pin: str | None,
    new_session: bool,
) -> None:
    """Run a live session of STUDY_FILE; on the same database it resumes where it was.

    A session that has ended is reopened read-only (payment sheet, debrief, reveal,
    export); a study file edited since the session was created is refused.
    """
    if pin is not None and not (pin.isdigit() and 4 <= len(pin) <= 12):
        click.echo(f"--pin holds {pin!r}; allowed: 4 to 12 digits", err=True)
        sys.exit(2)
    study = _load(study_file)
    path = Path(db_path) if db_path else Path.cwd() / f"{study.session.id}.db"
    _run_session(study, path.resolve(), host, port, seed, pin, new_session)


@main.command()
@click.option("--db", "db_path", type=click.Path(dir_okay=False), default=None,
              help="SQLite file to keep the demo in; start again with it to resume "
                   "[default: a fresh file in a temporary folder].")
@_HOST
@_PORT
def demo(db_path: str | None, host: str, port: int) -> None:
    """Start the built-in demo session (2 groups of 2 seats); resumes on the same --db."""
    import tempfile

    study = _load(str(example_study(DEMO_STUDY_FILE)))
    if db_path is None:
        path = Path(tempfile.mkdtemp(prefix="ebbtide-demo-")) / "demo.db"
    else:
        path = Path(db_path).resolve()
    _run_session(study, path, host, port, None, None)


def _not_a_session_database(path: Path) -> str | None:
    """Why ``path`` is not a session database, checked read-only (opening the store would add tables)."""
    import sqlite3

    with path.open("rb") as handle:
        if handle.read(16) != b"SQLite format 3\x00":
            return "not an SQLite database"
    try:
        connection = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)
        try:
            listed = connection.execute("SELECT name FROM sqlite_master WHERE type='table'")
            names = {row[0] for row in listed}
            if not {"sessions", "events"} <= names:
                return "an SQLite database without Ebbtide's sessions and events tables"
            connection.execute("PRAGMA quick_check").fetchall()
        finally:
            connection.close()
    except sqlite3.DatabaseError as exc:
        return f"a damaged SQLite database ({exc})"
    return None


def _refuse_damaged_database(path: Path) -> None:
    """One line and exit 2 when an existing, non-empty file is not a session database."""
    if path.is_file() and path.stat().st_size > 0:
        reason = _not_a_session_database(path)
        if reason:
            click.echo(f"{path}: {reason}; nothing changed; allowed: a session database written by "
                       "ebbtide serve, or a new file", err=True)
            sys.exit(2)


@main.command()
@click.argument("db_path", type=click.Path(exists=True, dir_okay=False))
@click.option("--out", "out_dir", type=click.Path(file_okay=False), required=True,
              help="Folder for the tables; one subfolder per session when the database holds several.")
@click.option("--stata", is_flag=True, help="Also write each table as a Stata .dta file.")
def export(db_path: str, out_dir: str, stata: bool) -> None:
    """Write the export tables of every session stored in DB_PATH."""
    import shutil
    import sqlite3
    import tempfile

    from ebbtide.analysis.progress import progress_bar
    from ebbtide.exports.stata import write_stata
    from ebbtide.game_logic.errors import EbbtideError
    from ebbtide.server.store.export import export_database

    problem = _not_a_session_database(Path(db_path))
    if problem:
        click.echo(f"{db_path}: {problem}; nothing written; allowed: a session database written by "
                   "ebbtide serve", err=True)
        sys.exit(2)
    out = Path(out_dir)
    if out.exists() and (not out.is_dir() or any(out.iterdir())):
        click.echo(f"{out}: already exists and is not an empty folder; choose a new folder for --out",
                   err=True)
        sys.exit(2)
    out.parent.mkdir(parents=True, exist_ok=True)
    # Written beside --out and renamed at the end: a damaged database leaves nothing behind.
    staging = Path(tempfile.mkdtemp(prefix=f".{out.name}-", dir=out.parent))
    try:
        with progress_bar(None, "export: sessions", "session") as bar:

            def tell(done: int, total: int) -> None:
                bar.total = total * (2 if stata else 1)
                bar.update(done - bar.n)
                bar.refresh()  # the total is known only now: redraw as a bar with a percentage

            folders = export_database(db_path, staging, on_session=tell)
            if stata:
                for folder in folders:
                    write_stata(folder)
                    bar.update(1)
    except (sqlite3.DatabaseError, EbbtideError, KeyError, ValueError, UnicodeDecodeError) as exc:
        shutil.rmtree(staging, ignore_errors=True)
        click.echo(f"{db_path}: cannot be exported, nothing written ({exc}); allowed: a session database "
                   "written by ebbtide serve", err=True)
        sys.exit(2)
    if not folders:
        shutil.rmtree(staging, ignore_errors=True)
        click.echo(f"{db_path} holds no session; nothing written", err=True)
        sys.exit(2)
    if out.exists():
        out.rmdir()
    staging.rename(out)
    for folder in folders:
        final = out / folder.relative_to(staging)
        extra = " and .dta" if stata else ""
        click.echo(f"wrote {final}/decisions.csv, rounds.csv, seats.csv, surveys.csv, timeline.csv{extra}, "
                   "datapackage.json")


@main.command()
@click.argument("db_path", type=click.Path(exists=True, dir_okay=False))
@click.option("--url", required=True, help="Address of the running session, e.g. http://127.0.0.1:8750.")
@click.option("--strategy", type=click.Choice(["max", *MODEL_NAMES]),
              default="conditional", show_default=True,
              help="Behaviour model of the bots (docs/behaviour-models.md).")
@click.option("--groups", "group_codes", default="",
              help="Comma-separated group codes the bots play (e.g. G01,G02) [default: every group].")
@click.option("--seed", type=click.IntRange(0, 2**63 - 1), default=1, show_default=True,
              help="Seed of the bots' own noise and thinking times.")
@click.option("--minutes", type=click.FloatRange(0.1, 600), default=30, show_default=True,
              help="Stop after this long even if the session has not ended.")
@_MODEL_FILE
def rehearse(db_path: str, url: str, strategy: str, group_codes: str, seed: int,
             minutes: float, model_spec: str | None) -> None:
    """Rehearsal: bots play seats of the session in DB_PATH served at --url.

    Pace the session from the console as usual; bots answer every round they are shown.
    """
    from ebbtide.exports.tables import group_code
    from ebbtide.game_logic.study import parse_study
    from ebbtide.server.rehearsal import rehearse as play
    from ebbtide.server.store import Store

    _refuse_damaged_database(Path(db_path))
    with Store(db_path) as store:
        records = store.sessions()
        if not records:
            click.echo(f"{db_path} holds no session", err=True)
            sys.exit(2)
        record = records[-1]
        keys = store.seat_keys(record.session_id)
    study = parse_study(record.study_text)
    model = _model(model_spec or strategy, study)
    wanted = {c.strip().upper() for c in group_codes.split(",") if c.strip()}
    known = {group_code(k.group) for k in keys}
    if wanted - known:
        click.echo(f"--groups names {sorted(wanted - known)}; allowed: {sorted(known)}", err=True)
        sys.exit(2)
    chosen = [k for k in keys if not wanted or group_code(k.group) in wanted]
    click.echo(f"rehearsal: {len(chosen)} bot(s) on {record.session_id} at {url}; "
               "start and pace the session from the console")
    # The bots' credential comes from the session's key in this database: no phone has it.
    result = play(url, study, chosen, record.secret_key, strategy=model, seed=seed,
                  max_seconds=minutes * 60)
    click.echo(f"{result.acknowledged} decision(s) acknowledged, {result.refused} refused, "
               f"in {result.seconds:.0f} s; session {'ended' if result.finished else 'still running'}")


if __name__ == "__main__":
    main()
