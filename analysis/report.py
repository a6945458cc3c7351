"""The analysis report: one self-contained HTML file, its tables also written as CSV.

Figures are embedded as base64 PNG; the page loads nothing from anywhere. A
section that does not apply to a design (one treatment, no threshold, nobody
crossed) says so and why, instead of failing.
"""

from __future__ import annotations

import base64
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import jinja2
import numpy as np
import pandas as pd

from ebbtide.game_logic.benchmarks import equal_share_of_sustainable_yield, maximum_sustainable_yield
from ebbtide.game_logic.design_review import design_summary

from . import figures
from .comparisons import block_comparisons, treatment_comparisons
from .exports_reader import ExportData, read_export
from .group_outcomes import group_outcomes
from .panel import fit_panel_models
from .summary import harvest_summary
from .survival import good_regime_survival
from .warning_signs import DEFINITIONS, indicator_summary, indicator_trends

OUTCOME = "group_harvest_per_round"


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


def _html(table: pd.DataFrame) -> str:
    return table.to_html(index=False, float_format=lambda v: f"{v:.4g}", na_rep="–", border=0,
                         classes="data")


def _num(value: float, decimals: int) -> str:
    """Fixed decimals, or "n/a" for a missing value (never "nan" in prose)."""
    return "n/a" if value is None or np.isnan(value) else f"{value:.{decimals}f}"


def _pct(value: float) -> str:
    return "–" if np.isnan(value) else f"{100 * value:.0f}%"


def build_report(data: ExportData, seed: int = 1) -> Report:
    """Compute every table and figure of the report from an export folder's data."""
    rng = np.random.default_rng(seed)
    studies = data.studies()
    groups = group_outcomes(data, seed=seed)
    has_threshold = any(s.threshold.rule != "none" for s in studies.values())
    capacity = max(s.resource.capacity for s in studies.values())
    tables: dict[str, pd.DataFrame] = {"group_outcomes": groups}
    sections = [_benchmarks(studies, groups, tables), _harvests(data, groups, tables)]
    sections.append(_stock_paths(data, groups, rng, capacity, has_threshold))
    sections.append(_treatments(groups, rng, tables))
    sections.append(_blocks(groups, tables))
    sections.append(_survival(groups, has_threshold, tables))
    sections.append(_regression(data, tables))
    sections.append(_early_warning(data, has_threshold, tables))
    sessions = pd.DataFrame([
        {"session": s.session_id, "source": s.source, "seed": s.seed,
         "study SHA-256": s.study_sha256[:16] + "…"}
        for s in data.sessions
    ])
    designs = {}
    for info in data.sessions:
        designs.setdefault(info.study_sha256, tuple(design_summary(studies[info.session_id])))
    title = "Pooled sessions" if data.pooled else data.sessions[0].session_id
    return Report(f"Ebbtide analysis: {title}", sessions, tuple(designs.items()), tuple(sections), tables)


def _benchmarks(studies, groups, tables) -> Section:
    rows = []
    for (block, name), cell in groups.groupby(["block", "block_name"], sort=True):
        study = studies[cell["session_id"].iloc[0]]
        msy = maximum_sustainable_yield(study.resource.growth, study.resource.capacity)
        rows.append({
            "block": block, "block_name": name, "groups": len(cell),
            "rounds_played_mean": cell["rounds_played"].mean(),
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
        f"{first.optimum_total_mean:.0f} units per group, everyone taking the maximum gives "
        f"{first.selfish_total_mean:.0f}; groups took {first.taken_total_mean:.0f} on average."
    )
    notes = (
        "Social optimum: dynamic programming over whole-unit stocks and the regime for the rounds the group "
        "actually played; with an uncertain threshold the planner knows only its distribution and does not "
        "learn from the path (an approximation). Selfish: every seat takes the maximum, simulated through "
        "the model with drawn thresholds and flips.",
    )
    return Section("Benchmarks", reading, (_html(table),), notes=notes)


def _harvests(data, groups, tables) -> Section:
    table = harvest_summary(groups, data.decisions, data.rounds)
    tables["summary"] = table
    figure = Figure("Box plots of group harvest per round by block and treatment",
                    figures.harvest_distributions(groups))
    best = table.sort_values("ratio_to_optimum_mean").iloc[-1]
    reading = (
        f"Groups took between {table.group_harvest_per_round_mean.min():.1f} and "
        f"{table.group_harvest_per_round_mean.max():.1f} units a round on average; the closest to the "
        f"optimum was block {best.block} / {best.treatment} at {_pct(best.ratio_to_optimum_mean)} of it."
    )
    return Section("Harvests per block and treatment", reading, (_html(table),), (figure,))


def _stock_paths(data, groups, rng, capacity, has_threshold) -> Section:
    chosen = figures.sample_groups(groups, rng)
    figure = Figure(f"Stock paths of {len(chosen)} sampled groups",
                    figures.stock_paths(data.rounds, chosen, capacity))
    shown = "the dashed line is the group's revealed threshold; " if has_threshold else ""
    reading = (
        f"{len(chosen)} of {len(groups)} group-blocks, drawn at random per treatment (crossings first); "
        f"{shown}grey rounds ended in the degraded regime."
    )
    return Section("Stock paths", reading, figures=(figure,))


def _treatments(groups, rng, tables) -> Section:
    title = "Treatment comparisons (group as the unit)"
    table = treatment_comparisons(groups, OUTCOME, rng)
    if table.empty:
        return Section(title, not_applicable="no block has two treatments with at least two groups each")
    tables["treatment_comparisons"] = table
    low = table.sort_values("p_mann_whitney").iloc[0]
    verdict = "a difference worth a closer look" if low.p_mann_whitney < 0.05 else "no clear difference"
    reading = (
        f"Outcome: each group's mean harvest per round. Smallest Mann–Whitney p = {low.p_mann_whitney:.3f} "
        f"({low.treatment_x} vs {low.treatment_y} in block {low.block}, common-language effect "
        f"{low.common_language:.2f}): {verdict} at this sample size."
    )
    columns = ["block", "treatment_x", "treatment_y", "n_x", "n_y", "mean_x", "mean_y", "u", "p_mann_whitney",
               "p_permutation", "mean_difference", "mean_difference_low", "mean_difference_high",
               "common_language", "common_language_low", "common_language_high", "rank_biserial"]
    return Section(title, reading, (_html(table[columns]),),
                   notes=("Intervals: 95% percentile bootstrap; permutation test of the mean difference.",))


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
        f"change {row.median_difference:+.2f} units a round per group, p = {row.p_value:.3f} (n = {row.n})."
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
    if result.not_applicable:
        reading = f"Still good at the end: {final}. Log-rank test not applicable: {result.not_applicable}."
    else:
        reading = (
            f"Still good at the end: {final}. Log-rank chi-square = {result.logrank_statistic:.2f} "
            f"on {result.logrank_df} df, p = {result.logrank_p:.3f}."
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
    reading = (
        f"{models.formula} on {models.observations} seat-rounds, {models.groups} groups, "
        f"{models.seats} seats. "
        f"One more unit taken by the others last round goes with {lag.ols_coef:+.2f} units asked now "
        f"(cluster-robust SE {lag.ols_cluster_se:.2f})."
    )
    return Section(title, reading, (_html(models.table),), notes=notes)


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
pre { background: #f3f6f6; padding: .6rem; overflow-x: auto; font-size: .85rem; }
.scroll { overflow-x: auto; }
table.data { border-collapse: collapse; font-size: .8rem; margin: .5rem 0; }
table.data th, table.data td { padding: .2rem .45rem; border-bottom: 1px solid #d6dede; text-align: right; }
table.data th { background: #e7efef; }
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


def write_report(folder: str | Path, out: str | Path, seed: int = 1) -> ReportFiles:
    """Read an export folder, write ``out`` (HTML) and ``<stem>-<table>.csv`` beside it."""
    data = read_export(folder)
    report = build_report(data, seed=seed)
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    paths = [out.with_name(f"{out.stem}-{name}.csv") for name in report.tables]
    for path, table in zip(paths, report.tables.values(), strict=True):
        table.to_csv(path, index=False)
    out.write_text(render_html(report, [p.name for p in paths]), encoding="utf-8")
    return ReportFiles(out, tuple(paths))
