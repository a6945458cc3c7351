"""The analysis report: one self-contained HTML file, its tables also written as CSV.

Figures are embedded as base64 PNG; the page loads nothing from anywhere. A
section that does not apply to a design (one treatment, no threshold, nobody
crossed) says so and why, instead of failing.
"""

from __future__ import annotations

import base64
import warnings
from dataclasses import dataclass, field, replace
from pathlib import Path

import jinja2
import numpy as np
import pandas as pd

from ebbtide.game_logic.benchmarks import equal_share_of_sustainable_yield, maximum_sustainable_yield
from ebbtide.game_logic.design_review import design_summary

from . import figures
from .comparisons import block_comparisons, omnibus_tests, treatment_comparisons
from .errors import MixedDesignsError
from .exports_reader import ExportData, read_export
from .group_outcomes import group_outcomes
from .panel import fit_panel_models, readable_term
from .plan import Plan, check_plan, departures, label_tests, planned_results
from .presentation import p_value as _p
from .presentation import table_html
from .progress import progress_bar
from .summary import harvest_summary
from .survival import good_regime_survival, paired_collapse_tests, within_subject
from .warning_signs import DEFINITIONS, indicator_summary, indicator_trends

# Per planned round: over the rounds played, emptying the stock early would look like a high take.
OUTCOME = "group_harvest_per_planned_round"


@dataclass(frozen=True)
class Figure:
    alt: str
    png: bytes

    @property
    def data_uri(self) -> str:
        return "data:image/png;base64," + base64.b64encode(self.png).decode("ascii")


@dataclass(frozen=True)
class Section:
    """One heading of the report: a plain reading, tables, figures, or why it does not apply."""

    title: str
    reading: str = ""
    tables: tuple[str, ...] = ()
    figures: tuple[Figure, ...] = ()
    not_applicable: str | None = None
    notes: tuple[str, ...] = ()
    scope: str = ""  # which design(s) the section's tables and tests are computed within


@dataclass(frozen=True)
class Report:
    title: str
    sessions: pd.DataFrame
    designs: tuple[tuple[str, tuple[str, ...]], ...]
    sections: tuple[Section, ...]
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)


@dataclass(frozen=True)
class ReportFiles:
    html: Path
    tables: tuple[Path, ...]


def _html(table: pd.DataFrame, caption: str = "") -> str:
    return table_html(table, caption)


def _num(value: float, decimals: int) -> str:
    """Fixed decimals, or "n/a" for a missing value (never "nan" in prose)."""
    return "n/a" if value is None or np.isnan(value) else f"{value:.{decimals}f}"


def _pct(value: float) -> str:
    return "–" if np.isnan(value) else f"{100 * value:.0f}%"


def designs_of(data: ExportData) -> dict[str, tuple[str, ...]]:
    """Session ids per design (study SHA-256), in the order the sessions appear."""
    found: dict[str, tuple[str, ...]] = {}
    for info in data.sessions:
        found[info.study_sha256] = found.get(info.study_sha256, ()) + (info.session_id,)
    return found


def _one_design(data: ExportData, session_ids: tuple[str, ...]) -> ExportData:
    keep = set(session_ids)
    return replace(
        data,
        sessions=tuple(s for s in data.sessions if s.session_id in keep),
        decisions=data.decisions[data.decisions["session_id"].isin(keep)],
        rounds=data.rounds[data.rounds["session_id"].isin(keep)],
        seats=data.seats[data.seats["session_id"].isin(keep)],
    )


def build_report(data: ExportData, seed: int = 1, by_design: bool = False, bar=None,
                 plan: Plan | None = None) -> Report:
    """Compute every table and figure of the report from an export folder's data.

    A pool of several designs is refused (``MixedDesignsError``) unless
    ``by_design``: then every table and test is computed within each design
    and says so; groups of two designs are never one sample. ``bar`` (a
    progress bar, optional) advances one step per section. With a pre-analysis ``plan``
    (refused when made for another study), every test is labelled confirmatory or
    exploratory and the departures from the plan are listed first.
    """
    if plan is not None:
        check_plan(plan, data)
    designs = designs_of(data)
    if len(designs) > 1 and not by_design:
        listed = ", ".join(f"{sha[:12]} ({len(ids)} session(s))" for sha, ids in designs.items())
        raise MixedDesignsError(
            f"{data.folder}: the pool holds {len(designs)} study designs ({listed}); their blocks and "
            "treatments are not comparable as one sample; add --by-design to compute every table "
            "within each design, or pool sessions of one design"
        )
    studies = data.studies()
    if bar is not None:
        bar.total = (bar.total or 0) + len(SECTION_BUILDERS) * len(designs)
    sections: list[Section] = []
    tables: dict[str, pd.DataFrame] = {}
    for sha, session_ids in designs.items():
        part = data if len(designs) == 1 else _one_design(data, session_ids)
        scope = f"Within design {sha[:12]}"
        if len(designs) > 1:
            scope += f", one of {len(designs)} in this pool ({len(session_ids)} session(s))"
        suffix = "" if len(designs) == 1 else f" — design {sha[:12]}"
        part_tables: dict[str, pd.DataFrame] = {}
        for section in _design_sections(part, seed, part_tables, bar):
            sections.append(replace(section, title=section.title + suffix, scope=scope))
        for name, table in part_tables.items():
            if "design" not in table:
                table = table.assign(design=sha[:12])[["design", *table.columns]]
            tables[name] = pd.concat([tables[name], table], ignore_index=True) if name in tables else table
    if plan is not None:
        groups = tables["group_outcomes"] if len(designs) == 1 else group_outcomes(data, seed=seed)
        sections[:0] = _plan(plan, data, groups, np.random.default_rng([seed, 1]), tables)
    sessions = pd.DataFrame([
        {"session": s.session_id, "source": s.source, "seed": s.seed,
         "design": s.study_sha256[:12]}
        for s in data.sessions
    ])
    described = {}
    for info in data.sessions:
        described.setdefault(info.study_sha256, tuple(design_summary(studies[info.session_id])))
    title = "Pooled sessions" if data.pooled else data.sessions[0].session_id
    return Report(f"Ebbtide analysis: {title}", sessions, tuple(described.items()), tuple(sections), tables)


def _design_sections(data: ExportData, seed: int, tables: dict[str, pd.DataFrame], bar=None) -> list[Section]:
    """Every section of one design's sessions (a single design: nothing here mixes designs)."""
    rng = np.random.default_rng(seed)
    studies = data.studies()
    groups = group_outcomes(data, seed=seed)
    context = {
        "data": data, "studies": studies, "groups": groups, "rng": rng, "tables": tables,
        "has_threshold": any(s.threshold.rule != "none" for s in studies.values()),
        "capacity": max(s.resource.capacity for s in studies.values()),
    }
    tables["group_outcomes"] = groups
    sections = []
    for name, build in SECTION_BUILDERS:
        if bar is not None:
            bar.set_description(f"report: {name}")
        sections.append(build(context))
        if bar is not None:
            bar.update(1)
    return sections


def _plan(plan, data, groups, rng, tables) -> list[Section]:
    results = planned_results(plan, groups, rng)
    labelled = label_tests(plan, tables)
    tables["plan_results"], tables["test_labels"] = results, labelled
    reading = (
        f"The plan of {plan.created} (study SHA-256 {plan.study_sha256[:16]}…, {plan.groups} groups) fixed "
        f"{len(results)} comparison(s): their results are confirmatory; the other "
        f"{(labelled['label'] == 'exploratory').sum()} test(s) of this report are exploratory."
    )
    moved = departures(plan, data, groups, results)
    return [
        Section("Pre-analysis plan: confirmatory and exploratory tests", reading,
                (_html(results), _html(labelled))),
        Section("Departures from the plan", " ".join(moved) if moved else
                "None: the study file is the one planned and as many groups played as planned."),
    ]


def _benchmarks(studies, groups, tables) -> Section:
    rows = []
    for (block, name), cell in groups.groupby(["block", "block_name"], sort=True):
        study = studies[cell["session_id"].iloc[0]]
        msy = maximum_sustainable_yield(study.resource.growth, study.resource.capacity)
        rows.append({
            "block": block, "block_name": name, "groups": len(cell),
            "rounds_played_mean": cell["rounds_played"].mean(),
            "horizon_rounds_mean": cell["horizon_rounds"].mean(),
            "optimum_total_mean": cell["optimum_total"].mean(),
            "selfish_total_mean": cell["selfish_total"].mean(),
            "sustainable_total_mean": cell["sustainable_total"].mean(),
            "equal_share_per_seat": equal_share_of_sustainable_yield(study),
            "msy_per_round": msy.harvest,
            "taken_total_mean": cell["group_harvest_total"].mean(),
        })
    table = pd.DataFrame(rows)
    tables["benchmarks"] = table
    first = table.iloc[0]
    reading = (
        f"In block {first.block}, a planner who knew the length of play would expect "
        f"{_num(first.optimum_total_mean, 0)} units per group, everyone taking the maximum gives "
        f"{_num(first.selfish_total_mean, 0)}; groups took {_num(first.taken_total_mean, 0)} on average."
    )
    notes = (
        "Fixed horizon: the rounds the design planned for the block when the group exhausted the stock (the "
        "rounds lost count as zero harvest), otherwise the rounds played (a random stop is not the group's "
        "doing). Social optimum: dynamic programming over whole-unit stocks and the regime for that horizon; "
        "with an uncertain threshold the planner knows only its distribution and does not "
        "learn from the path (an approximation). Selfish: every seat takes the maximum, simulated through "
        "the model with drawn thresholds and flips.",
    )
    return Section("Benchmarks", reading, (_html(table),), notes=notes)


def _harvests(data, groups, tables) -> Section:
    table = harvest_summary(groups, data.decisions, data.rounds)
    tables["summary"] = table
    figure = Figure("Box plots of group harvest per planned round by block and treatment",
                    figures.harvest_distributions(groups))
    best = table.sort_values("ratio_to_optimum_mean").iloc[-1]
    reading = (
        f"Groups took between {_num(table.group_harvest_per_planned_round_mean.min(), 1)} and "
        f"{_num(table.group_harvest_per_planned_round_mean.max(), 1)} units per planned round on average; "
        f"the closest to the optimum was block {best.block} / {best.treatment} at "
        f"{_pct(best.ratio_to_optimum_mean)} of it."
    )
    return Section("Harvests per block and treatment", reading, (_html(table),), (figure,))


def _stock_paths(data, groups, rng, capacity, has_threshold) -> Section:
    chosen = figures.sample_groups(groups, rng)
    figure = Figure(f"Stock paths of {len(chosen)} sampled groups",
                    figures.stock_paths(data.rounds, chosen, capacity))
    shown = "the dashed line is the group's revealed threshold; " if has_threshold else ""
    crossed = int(chosen["crossed"].sum())
    reading = (
        f"{len(chosen)} of {len(groups)} group-blocks, a simple random sample per block and treatment "
        f"({crossed} of them crossed, {_pct(groups['crossed'].mean())} of all group-blocks did); "
        f"{shown}grey rounds ended in the degraded regime (see the legend)."
    )
    return Section("Stock paths", reading, figures=(figure,))


def _round_means(data, groups, tables) -> Section:
    means = figures.round_means(data.rounds, groups)
    tables["round_means"] = means
    figure = Figure("Mean group harvest and mean stock by round, per block and treatment",
                    figures.round_means_figure(means))
    reading = ("Mean group harvest and mean stock at the start of each round, per block and treatment; "
               "a group that exhausted the stock counts with harvest 0 and stock 0 in the rounds it lost.")
    return Section("Harvest and stock by round", reading, figures=(figure,))


def _earnings(data, tables) -> Section:
    per_seat = data.decisions.groupby(["session_id", "group_id", "seat_id", "block", "treatment"],
                                      sort=False)["points"].sum().reset_index()
    rows = []
    for (block, treatment), cell in per_seat.groupby(["block", "treatment"], sort=True):
        points = cell["points"].astype(float)
        rows.append({"block": block, "treatment": treatment, "seats": len(cell),
                     "points_per_seat_mean": points.mean(), "points_per_seat_median": points.median(),
                     "points_per_seat_sd": points.std(ddof=1) if len(points) > 1 else float("nan"),
                     "points_per_seat_min": points.min(), "points_per_seat_max": points.max()})
    table = pd.DataFrame(rows)
    tables["earnings"] = table
    top = table.sort_values("points_per_seat_mean").iloc[-1]
    reading = ("Points a seat earned in a block, by treatment: the highest mean is "
               f"{_num(top.points_per_seat_mean, 1)} points ({top.treatment}, block {top.block}).")
    notes = ("Cash (show-up fee included, rounded up) is paid over the whole session: see seats.csv.",)
    return Section("Earnings by treatment", reading, (_html(table),), notes=notes)


def _treatments(groups, rng, tables) -> Section:
    title = "Treatment comparisons (group as the unit)"
    table = treatment_comparisons(groups, OUTCOME, rng)
    if table.empty:
        return Section(title, not_applicable="no block has two treatments with at least two groups each")
    omnibus = omnibus_tests(groups, OUTCOME)
    tables["treatment_omnibus"] = omnibus
    tables["treatment_comparisons"] = table
    first = omnibus.sort_values("p_kruskal_wallis").iloc[0]
    low = table.sort_values("p_holm").iloc[0]
    verdict = "a difference worth a closer look" if low.p_holm < 0.05 else "no clear difference"
    reading = (
        "Outcome: each group's harvest per planned round (exhausted rounds count as zero). "
        f"Across all {first.treatments} treatments of block {first.block}: Kruskal–Wallis H = "
        f"{_num(first.h, 2)} on {first.df} df, p = {_p(first.p_kruskal_wallis)}. "
        f"Smallest Holm-adjusted pairwise Mann–Whitney p = {_p(low.p_holm)} "
        f"({low.treatment_x} vs {low.treatment_y}, common-language effect "
        f"{_num(low.common_language, 2)}): {verdict} at this sample size."
    )
    columns = ["block", "treatment_x", "treatment_y", "n_x", "n_y", "mean_x", "mean_y",
               "mean_difference", "mean_difference_low", "mean_difference_high",
               "common_language", "common_language_low", "common_language_high", "rank_biserial",
               "u", "p_mann_whitney", "p_holm", "p_permutation"]
    omnibus_columns = ["block", "treatments", "groups", "h", "df", "p_kruskal_wallis"]
    notes = ("Omnibus: Kruskal–Wallis across the treatments of a block; pairwise: Mann–Whitney U with Holm's "
             "step-down correction within the block, and a permutation test of the mean difference (not "
             "adjusted). Intervals: 95% percentile bootstrap for the mean difference, logit-scale interval "
             "with DeLong's variance for the common-language effect.",)
    return Section(title, reading, (_html(omnibus[omnibus_columns], "Omnibus test per block"),
                                    _html(table[columns], "Pairwise comparisons")), notes=notes)


def _blocks(groups, tables) -> Section:
    title = "Block comparisons within groups (Wilcoxon signed-rank)"
    if groups["block"].nunique() < 2:
        return Section(title, not_applicable="the design has one block only")
    table = block_comparisons(groups, OUTCOME)
    if table.empty:
        return Section(title, not_applicable="fewer than two groups played both of two consecutive blocks")
    tables["block_comparisons"] = table
    row = table.iloc[0]
    reading = (
        f"Block {row.block_x} ({row.treatment_x}) minus block {row.block_y} ({row.treatment_y}): median "
        f"change {_num(row.median_difference, 2)} units per planned round per group, p = {_p(row.p_value)} "
        f"(n = {row.n})."
    )
    return Section(title, reading, (_html(table),))


def _survival(groups, has_threshold, tables) -> Section:
    title = "Survival of the good regime (Kaplan–Meier, log-rank)"
    result = good_regime_survival(groups, has_threshold)
    if not result.curves:
        return Section(title, not_applicable=result.not_applicable)
    stacked = pd.concat([c.assign(treatment=t) for t, c in result.curves.items()], ignore_index=True)
    tables["survival"] = stacked
    figure = Figure("Kaplan–Meier curves of the good regime per treatment", figures.survival_curves(result))
    final = ", ".join(f"{t} {_pct(c['survival'].iloc[-1])}" for t, c in result.curves.items())
    paired = paired_collapse_tests(groups) if within_subject(groups) and groups["collapsed"].any() \
        else pd.DataFrame()
    if not paired.empty:
        tables["survival_paired"] = paired
        row = paired.iloc[0]
        reading = (
            f"Still good at the end: {final}. Paired by group, block {row.block_x} collapsed first in "
            f"{row.x_collapsed_first} groups and block {row.block_y} in {row.y_collapsed_first} "
            f"({row.undetermined} of {row.pairs} pairs left open by censoring or a tie); "
            f"sign test p = {_p(row.p_sign_test)}."
        )
        notes = ("Within-subject design: the blocks of the same groups are paired, so no log-rank test pools "
                 "them as independent samples. Each pair is ordered by Gehan's rule (a collapse at round t "
                 "comes before a later collapse and before a block that ended at t without one); open pairs "
                 "are left out and the exact two-sided sign test counts the rest.",)
        return Section(title, reading, (_html(paired),), (figure,), notes=notes)
    if result.not_applicable:
        reading = f"Still good at the end: {final}. Log-rank test not applicable: {result.not_applicable}."
    else:
        reading = (
            f"Still good at the end: {final}. Log-rank chi-square = {_num(result.logrank_statistic, 2)} "
            f"on {result.logrank_df} df, p = {_p(result.logrank_p)}."
        )
    return Section(title, reading, figures=(figure,))


def _regression(data, tables) -> Section:
    title = "Panel regressions of individual harvest"
    if data.decisions["harvest_asked"].nunique() < 2:
        return Section(title, not_applicable="every seat asked the same amount every round")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            models = fit_panel_models(data.decisions)
        except (ValueError, np.linalg.LinAlgError) as exc:
            return Section(title, not_applicable=f"the models could not be fitted: {exc}")
    tables["regression"] = models.table
    notes = models.notes + tuple(f"warning: {str(w.message).splitlines()[0]}" for w in caught)
    lag = models.table.set_index("term").loc["others_lag"]
    bases = ", ".join(f"{name} {level}" for name, level in models.bases.items())
    reading = (
        f"{models.formula} on {models.observations} seat-rounds, {models.groups} groups, "
        f"{models.seats} seats. "
        f"One more unit taken by the others last round goes with {_num(lag.ols_coef, 2)} units asked now "
        f"(95% CI {_num(lag.ols_coef_low, 2)} to {_num(lag.ols_coef_high, 2)}, standard errors clustered by "
        f"group, {models.clusters} clusters)."
        + (f" Base categories: {bases}." if bases else "")
    )
    shown = models.table.assign(term=[readable_term(t, models.bases) for t in models.table["term"]])
    caption = f"OLS: standard errors clustered by group ({models.clusters} clusters)"
    return Section(title, reading, (_html(shown, caption),), notes=notes)


def _early_warning(data, has_threshold, tables) -> Section:
    title = "Early-warning indicators of the stock paths"
    if not has_threshold:
        return Section(title, not_applicable="the design has no threshold: no transition to announce")
    trends = indicator_trends(data.rounds)
    if trends["tau_variance"].notna().sum() == 0:
        return Section(title, not_applicable="every stock path is shorter than six rounds")
    summary = indicator_summary(trends)
    tables["early_warning"] = trends
    tables["early_warning_summary"] = summary
    crossed = trends[trends["crossed"]]["tau_variance"].mean()
    control = trends[~trends["crossed"]]["tau_variance"].mean()
    if trends["crossed"].any():
        reading = (
            f"Kendall's tau of the rolling variance (detrended paths) averages {_num(crossed, 2)} before the "
            f"first crossing and {_num(control, 2)} in control paths of the same length that never crossed; "
            "only a clear gap says more than the decline itself."
        )
    else:
        reading = f"No group crossed; Kendall's tau of the rolling variance averages {_num(control, 2)}."
    return Section(title, reading, (_html(summary),), notes=(DEFINITIONS,))


# The report's sections in order, each built from the design's shared context.
SECTION_BUILDERS = (
    ("benchmarks", lambda c: _benchmarks(c["studies"], c["groups"], c["tables"])),
    ("harvests", lambda c: _harvests(c["data"], c["groups"], c["tables"])),
    ("harvest and stock by round", lambda c: _round_means(c["data"], c["groups"], c["tables"])),
    ("earnings", lambda c: _earnings(c["data"], c["tables"])),
    ("stock paths", lambda c: _stock_paths(c["data"], c["groups"], c["rng"], c["capacity"],
                                           c["has_threshold"])),
    ("treatments", lambda c: _treatments(c["groups"], c["rng"], c["tables"])),
    ("blocks", lambda c: _blocks(c["groups"], c["tables"])),
    ("survival", lambda c: _survival(c["groups"], c["has_threshold"], c["tables"])),
    ("regression", lambda c: _regression(c["data"], c["tables"])),
    ("early warning", lambda c: _early_warning(c["data"], c["has_threshold"], c["tables"])),
)


TEMPLATE = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined).from_string("""\
<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{ report.title }}</title>
<style>
body { font-family: "DejaVu Sans", system-ui, sans-serif; max-width: 72rem; margin: 1.5rem auto;
       padding: 0 1rem; color: #1d2a30; line-height: 1.45; }
h1 { font-size: 1.5rem; border-bottom: 3px solid #2f6f73; padding-bottom: .3rem; }
h2 { font-size: 1.15rem; margin-top: 2rem; color: #2f6f73; }
.caution { background: #fff6e0; border-left: 4px solid #b7791f; padding: .6rem .9rem; }
.reading { font-weight: 600; }
.na { color: #6b5b00; font-style: italic; }
.note { color: #4a5a60; font-size: .85rem; }
.scope { color: #2f6f73; font-size: .8rem; margin: 0; }
pre { background: #f3f6f6; padding: .6rem; white-space: pre-wrap; overflow-wrap: break-word;
      font-size: .85rem; }
.scroll { overflow-x: auto; }
table.data { border-collapse: collapse; font-size: .8rem; margin: .5rem 0; }
table.data caption { text-align: left; font-size: .8rem; color: #4a5a60; padding: .2rem 0; }
table.data th, table.data td { padding: .2rem .45rem; border-bottom: 1px solid #d6dede; text-align: right; }
table.data th { background: #e7efef; vertical-align: bottom; max-width: 9rem; overflow-wrap: break-word; }
table.data td { white-space: nowrap; }
@page { size: A4; margin: 12mm; }
@media print {
  body { max-width: none; margin: 0; padding: 0; font-size: 10pt; }
  .scroll { overflow: visible; }
  table.data { font-size: 7.5pt; break-inside: auto; }
  table.data th, table.data td { padding: .1rem .3rem; }
  h2 { break-after: avoid; }
  img { break-inside: avoid; }
}
img { max-width: 100%; height: auto; display: block; margin: .5rem 0; }
</style></head><body>
<h1>{{ report.title }}</h1>
<p class="caution">Seat codes are anonymous: keep any list that links them to people apart from this report.
This is a teaching and research game: its stock and thresholds are invented for play and are not a
forecast for any real fishery, forest or pasture.</p>
<h2>Sessions</h2>
<div class="scroll">{{ sessions | safe }}</div>
<h2>Design</h2>
{% for sha, lines in report.designs %}<pre>{{ lines | join("\n") }}</pre>{% endfor %}
{% for section in report.sections %}
<section><h2>{{ section.title }}</h2>
{% if section.scope %}<p class="scope">{{ section.scope }}.</p>{% endif %}
{% if section.not_applicable and not section.figures %}
<p class="na">Not applicable: {{ section.not_applicable }}.</p>
{% else %}<p class="reading">{{ section.reading }}</p>
{% for figure in section.figures %}<img src="{{ figure.data_uri }}" alt="{{ figure.alt }}">{% endfor %}
{% for table in section.tables %}<div class="scroll">{{ table | safe }}</div>{% endfor %}
{% endif %}
{% for note in section.notes %}<p class="note">{{ note }}</p>{% endfor %}
</section>
{% endfor %}
<h2>Tables as CSV</h2>
<p class="note">Written next to this file for work in R or Stata: {{ csv_names | join(", ") }}.</p>
</body></html>
""")


def render_html(report: Report, csv_names: list[str]) -> str:
    return TEMPLATE.render(report=report, sessions=_html(report.sessions), csv_names=csv_names)


def write_report(folder: str | Path, out: str | Path, seed: int = 1, by_design: bool = False,
                 progress: bool | None = None, plan: Plan | None = None) -> ReportFiles:
    """Read an export folder, write ``out`` (HTML) and ``<stem>-<table>.csv`` beside it.

    ``progress`` None shows a bar only on a terminal; True or False force it on or off.
    """
    with progress_bar(2, "report: reading", show=progress) as bar:
        data = read_export(folder)
        bar.update(1)
        report = build_report(data, seed=seed, by_design=by_design, bar=bar, plan=plan)
        bar.set_description("report: writing")
        out = Path(out)
        out.parent.mkdir(parents=True, exist_ok=True)
        paths = [out.with_name(f"{out.stem}-{name}.csv") for name in report.tables]
        for path, table in zip(paths, report.tables.values(), strict=True):
            table.to_csv(path, index=False)
        out.write_text(render_html(report, [p.name for p in paths]), encoding="utf-8")
        bar.update(1)
    return ReportFiles(out, tuple(paths))
