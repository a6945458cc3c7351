"""A pre-analysis plan fixed before the data, and the report's results held against it.

``ebbtide plan`` writes the comparisons a design is built for
(``power.planned_hypotheses``: outcome, test, direction, level), the number of
groups planned and the power expected there, stamped with the study file's
SHA-256 and the time. ``ebbtide report --plan`` labels a result *confirmatory*
when it is one of those comparisons, and every other test *exploratory*, and
lists where the data departs from the plan.

A plan made for another study (another ``[session] id``) is refused; the same
study with an edited file is a departure, named with both hashes.
"""

from __future__ import annotations

import csv
import math
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ebbtide.game_logic.study import Study

from .comparisons import block_comparisons, treatment_comparisons
from .exports_reader import ExportData
from .power import OUTCOMES, Hypothesis, planned_hypotheses

PLAN_FORMAT = "ebbtide-plan-1"
CONFIRMATORY, EXPLORATORY = "confirmatory", "exploratory"


class PlanError(ValueError):
    """A plan file that cannot be used; the message is one line."""


class PlanForAnotherStudy(PlanError):
    """The plan was made for another study than the one the export holds."""

    def __init__(self, plan: Plan, study_id: str, sha256: str):
        self.plan_sha256, self.data_sha256 = plan.study_sha256, sha256
        super().__init__(
            f"the plan was made for study {plan.study_id!r} (SHA-256 {plan.study_sha256}) but the export "
            f"holds study {study_id!r} (SHA-256 {sha256}); allowed: the plan written for this study file"
        )


@dataclass(frozen=True)
class PlannedComparison:
    hypothesis: Hypothesis
    power: float | None = None  # expected at the planned groups; None when not estimated
    power_standard_error: float | None = None


@dataclass(frozen=True)
class Plan:
    study_id: str
    study_title: str
    study_sha256: str
    created: str  # ISO 8601, UTC
    groups: int
    comparisons: tuple[PlannedComparison, ...]
    power_source: str


def make_plan(study: Study, created: str, groups: int | None = None,
              power: Mapping[str, tuple[float, float]] | None = None, power_source: str = "",
              outcome: str = "group_harvest_per_round", level: float = 0.05) -> Plan:
    """The plan of ``study``; ``power`` maps a hypothesis label to (power, Monte Carlo s.e.)."""
    hypotheses = planned_hypotheses(study, outcome, level)
    if not hypotheses:
        raise PlanError("the study plans no treatment comparison: no block rotates two treatments and no two "
                        "blocks differ in treatment")
    power = power or {}
    comparisons = tuple(PlannedComparison(h, *power.get(h.label, (None, None))) for h in hypotheses)
    return Plan(study.session.id, study.session.title, study.sha256, created,
                groups or study.groups.count, comparisons, power_source)


def power_from_file(path: str | Path, groups: int) -> dict[str, tuple[float, float]]:
    """(power, s.e.) per hypothesis label at ``groups``, from a ``power.csv`` of ``ebbtide power``."""
    try:
        with open(path, newline="", encoding="utf-8") as handle:
            rows = list(csv.DictReader(handle))
        found = {r["hypothesis"]: (float(r["power"]), float(r["standard_error"]))
                 for r in rows if int(r["groups"]) == groups}
        counts = sorted({int(r["groups"]) for r in rows})
    except (OSError, UnicodeDecodeError, KeyError, ValueError, TypeError) as exc:
        raise PlanError(f"--power {path}: not a power.csv written by ebbtide power ({exc})") from exc
    if not found:
        raise PlanError(f"--power {path} has no row for {groups} groups; it holds {counts}: run "
                        f"ebbtide power with {groups} among --groups")
    return found


def plan_text(plan: Plan) -> str:
    """The plan as TOML, readable by a review board and by ``read_plan``."""
    def value(v) -> str:
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
        return repr(float(v)) if isinstance(v, float) else str(v)

    lines = [
        "# Pre-analysis plan written by ebbtide plan before any data of this study exists.",
        "# Results of these comparisons are confirmatory; every other test is exploratory.",
        f"format = {value(PLAN_FORMAT)}",
        f"created = {value(plan.created)}",
        "",
        "[study]",
        f"id = {value(plan.study_id)}",
        f"title = {value(plan.study_title)}",
        f"sha256 = {value(plan.study_sha256)}",
        "",
        "[design]",
        f"groups = {plan.groups}",
        f"power_source = {value(plan.power_source)}",
    ]
    for c in plan.comparisons:
        h = c.hypothesis
        lines += ["", "[[comparisons]]", f"label = {value(h.label)}"]
        lines += [f"{k} = {value(getattr(h, k))}"
                  for k in ("kind", "block", "x", "y", "outcome", "test", "direction", "level")]
        if c.power is not None:
            lines += [f"power = {value(c.power)}", f"power_standard_error = {value(c.power_standard_error)}"]
    return "\n".join(lines) + "\n"


def read_plan(path: str | Path) -> Plan:
    """A plan file written by ``plan_text``; one-line ``PlanError`` otherwise."""
    try:
        data = tomllib.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise PlanError(f"--plan {path}: cannot be read ({exc}); allowed: a plan written by "
                        "ebbtide plan") from exc
    if data.get("format") != PLAN_FORMAT:
        raise PlanError(f"--plan {path}: format is {data.get('format')!r}; allowed: {PLAN_FORMAT!r}, "
                        "a plan written by ebbtide plan")
    try:
        comparisons = []
        for c in data["comparisons"]:
            h = Hypothesis(str(c["kind"]), int(c["block"]), str(c["x"]), str(c["y"]), str(c["outcome"]),
                           str(c["test"]), str(c["direction"]), float(c["level"]))
            if h.kind not in ("between", "within") or h.outcome not in OUTCOMES:
                raise ValueError(f"comparison {c['label']!r} has kind {h.kind!r}, outcome {h.outcome!r}")
            comparisons.append(PlannedComparison(h, c.get("power"), c.get("power_standard_error")))
        study, design = data["study"], data["design"]
        return Plan(str(study["id"]), str(study["title"]), str(study["sha256"]), str(data["created"]),
                    int(design["groups"]), tuple(comparisons), str(design.get("power_source", "")))
    except (KeyError, TypeError, ValueError) as exc:
        raise PlanError(f"--plan {path}: incomplete plan ({exc.__class__.__name__}: {exc}); allowed: a plan "
                        "written by ebbtide plan") from exc


def check_plan(plan: Plan, data: ExportData) -> None:
    """Refuse a plan made for another study than every session of ``data``."""
    for info in data.sessions:
        study = data.studies()[info.session_id]
        if study.session.id != plan.study_id:
            raise PlanForAnotherStudy(plan, study.session.id, info.study_sha256)


# The report measures harvest over the planned horizon (rounds lost to an empty stock count as
# zero); a plan's harvest outcome is that same comparison.
_SAME_OUTCOME = {"group_harvest_per_round": "group_harvest_per_planned_round"}


def _key(kind: str, block, x, y, outcome: str, test: str) -> tuple:
    return (kind, str(block), frozenset((str(x), str(y))), _SAME_OUTCOME.get(outcome, outcome), test)


def _planned_keys(plan: Plan) -> set[tuple]:
    keys = set()
    for c in plan.comparisons:
        h = c.hypothesis
        block = h.block if h.kind == "between" else h.x  # within: block x against block y
        keys.add(_key(h.kind, block, h.x, h.y, h.outcome, h.test))
    return keys


def planned_results(plan: Plan, groups: pd.DataFrame, rng: np.random.Generator) -> pd.DataFrame:
    """Every planned comparison with its result (the report's tests), or why it could not be tested."""
    between = {o: treatment_comparisons(groups, o, rng) for o in
               {c.hypothesis.outcome for c in plan.comparisons if c.hypothesis.kind == "between"}}
    within = {o: block_comparisons(groups, o) for o in
              {c.hypothesis.outcome for c in plan.comparisons if c.hypothesis.kind == "within"}}
    rows = []
    for c in plan.comparisons:
        h = c.hypothesis
        p, n, note = math.nan, "", ""
        if h.kind == "between":
            table = between[h.outcome]
            hit = table[(table["block"] == h.block) & (
                ((table["treatment_x"] == h.x) & (table["treatment_y"] == h.y))
                | ((table["treatment_x"] == h.y) & (table["treatment_y"] == h.x)))] if len(table) else table
            if len(hit):
                p, n = float(hit["p_mann_whitney"].iloc[0]), f"{hit['n_x'].iloc[0]} + {hit['n_y'].iloc[0]}"
        else:
            table = within[h.outcome]
            if len(table):
                table = table[(table["block_x"] == int(h.x)) & (table["block_y"] == int(h.y))]
            hit = table
            if len(hit):
                p, n = float(hit["p_value"].iloc[0]), str(hit["n"].iloc[0])
        if math.isnan(p):
            note = "not tested: fewer than two groups on a side"
        rows.append({"comparison": h.label, "outcome": h.outcome, "test": h.test, "direction": h.direction,
                     "level": h.level, "groups": n, "p_value": p,
                     "rejected": (p < h.level) if not math.isnan(p) else None,
                     "power_planned": c.power, "label": CONFIRMATORY, "note": note})
    return pd.DataFrame(rows)


def label_tests(plan: Plan, tables: Mapping[str, pd.DataFrame]) -> pd.DataFrame:
    """Every test the report ran, labelled confirmatory (planned) or exploratory (everything else).

    Adds a ``label`` column to the report's comparison tables (so their CSV files carry it too).
    """
    planned = _planned_keys(plan)
    rows = []

    def add(table_name: str, label: str, test: str, p: float) -> None:
        rows.append({"report table": table_name, "test": test, "p_value": p, "label": label})

    table = tables.get("treatment_comparisons")
    if table is not None and len(table):
        labels = [CONFIRMATORY if _key("between", r.block, r.treatment_x, r.treatment_y, r.outcome,
                                       "mann-whitney") in planned else EXPLORATORY
                  for r in table.itertuples()]
        table["label"] = labels
        for r, label in zip(table.itertuples(), labels, strict=True):
            name = f"block {r.block}: {r.treatment_x} vs {r.treatment_y} ({r.outcome}"
            add("treatment_comparisons", label, name + ", mann-whitney)", r.p_mann_whitney)
            add("treatment_comparisons", EXPLORATORY, name + ", permutation of the mean difference)",
                r.p_permutation)
    table = tables.get("block_comparisons")
    if table is not None and len(table):
        labels = [CONFIRMATORY if _key("within", r.block_x, r.block_x, r.block_y, r.outcome,
                                       "wilcoxon") in planned else EXPLORATORY
                  for r in table.itertuples()]
        table["label"] = labels
        for r, label in zip(table.itertuples(), labels, strict=True):
            add("block_comparisons", label, f"block {r.block_x} vs block {r.block_y} ({r.outcome}, wilcoxon)",
                r.p_value)
    if "survival" in tables:
        add("survival", EXPLORATORY, "log-rank test of the good regime between treatments", math.nan)
    table = tables.get("regression")
    if table is not None:
        for r in table.itertuples():
            if pd.isna(r.ols_p):
                continue  # a variance component, not a test
            add("regression", EXPLORATORY, f"panel regression term {r.term} (OLS, cluster-robust)", r.ols_p)
    table = tables.get("early_warning_summary")
    if table is not None:
        for r in table.itertuples():
            add("early_warning_summary", EXPLORATORY,
                f"block {r.block} / {r.treatment}: variance tau, crossing vs control (mann-whitney)",
                r.p_variance)
    return pd.DataFrame(rows, columns=["report table", "test", "p_value", "label"])


def departures(plan: Plan, data: ExportData, groups: pd.DataFrame, results: pd.DataFrame) -> list[str]:
    """Where the data departs from the plan, one sentence each; empty when it follows the plan."""
    found = []
    for info in data.sessions:
        if info.study_sha256 != plan.study_sha256:
            found.append(f"The study file changed after the plan was made: session {info.session_id} ran "
                         f"SHA-256 {info.study_sha256}, the plan fixed SHA-256 {plan.study_sha256}.")
    played = groups[["session_id", "group_id"]].drop_duplicates().shape[0]
    if played < plan.groups:
        found.append(f"Fewer groups than planned: {played} played, {plan.groups} planned; the power expected "
                     "in the plan does not hold for this sample.")
    elif played > plan.groups:
        found.append(f"More groups than planned: {played} played, {plan.groups} planned.")
    for r in results.itertuples():
        if r.note:
            found.append(f"{r.comparison}: {r.note}.")
    return found


def plan_summary(plan: Plan) -> Sequence[str]:
    """Lines the command prints after writing a plan."""
    lines = [f"plan for {plan.study_id} (SHA-256 {plan.study_sha256}), {plan.groups} groups, {plan.created}"]
    for c in plan.comparisons:
        h = c.hypothesis
        shown = ("power not estimated" if c.power is None
                 else f"power {c.power:.2f} (s.e. {c.power_standard_error:.3f})")
        lines.append(f"  {h.label}, {h.direction}, level {h.level:g}: {shown}")
    return lines
