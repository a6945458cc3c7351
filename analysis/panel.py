"""Panel regressions of individual harvest on treatment, block, round and the group's past.

Two models on the seat-round panel (round 1 of each block is dropped: it has
no previous round):

- a linear mixed model (statsmodels MixedLM) with a random intercept per group
  and a variance component per seat nested in its group;
- OLS with standard errors clustered by group (statsmodels' cluster sandwich
  with its default small-sample factor G/(G-1) * (N-1)/(N-K)).

Regressors: treatment and block dummies (dropped when they add no information,
e.g. one treatment per block), the round number, the stock at the start of the
round (what the previous round left; ``lagged_stock``) and the mean harvest the
other seats took in the previous round (``others_lag``).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import statsmodels.formula.api as smf

from .group_outcomes import group_key


@dataclass(frozen=True)
class PanelModels:
    """Coefficient table of both models, sizes, and notes on dropped terms or fitting."""

    table: pd.DataFrame
    formula: str
    observations: int
    groups: int
    seats: int
    notes: tuple[str, ...] = field(default_factory=tuple)


def panel_frame(decisions: pd.DataFrame) -> pd.DataFrame:
    """Seat-round rows with ``lagged_stock`` and ``others_lag``; first rounds dropped."""
    panel = decisions.sort_values(["session_id", "group_id", "seat_id", "block", "round"]).copy()
    panel["group"] = group_key(panel)
    panel["seat"] = panel["group"] + "/" + panel["seat_id"]
    cell = ["group", "block", "round"]
    totals = panel.groupby(cell)["harvest_taken"].transform("sum")
    seats = panel.groupby(cell)["harvest_taken"].transform("size")
    others_now = (totals - panel["harvest_taken"]) / (seats - 1).where(seats > 1)
    previous = panel.groupby(["seat", "block"])["round"].shift(1)
    panel["others_lag"] = others_now.groupby([panel["seat"], panel["block"]]).shift(1)
    panel = panel[previous.notna() & (previous == panel["round"] - 1)].copy()
    panel["lagged_stock"] = panel["stock_before"]
    panel["harvest"] = panel["harvest_asked"].astype(float)
    return panel.dropna(subset=["others_lag"])


def _terms(panel: pd.DataFrame) -> tuple[list[str], list[str]]:
    """Regressors that the data can identify, and notes on those left out."""
    base = ["round", "lagged_stock", "others_lag"]
    optional = []
    notes = []
    if panel["treatment"].nunique() > 1:
        optional.append("C(treatment)")
    else:
        notes.append("one treatment only: no treatment term")
    if panel["block"].nunique() > 1:
        optional.append("C(block)")
    chosen = []
    for term in optional:
        trial = chosen + [term] + base
        matrix = smf.ols("harvest ~ " + " + ".join(trial), panel).exog
        if np.linalg.matrix_rank(matrix) == matrix.shape[1]:
            chosen.append(term)
        else:
            notes.append(f"{term} left out: collinear with the terms before it (one treatment per block?)")
    return chosen + base, notes


def fit_panel_models(decisions: pd.DataFrame) -> PanelModels:
    """Fit both models; harvest is the units a seat asked (its decision, before rationing)."""
    panel = panel_frame(decisions)
    terms, notes = _terms(panel)
    formula = "harvest ~ " + " + ".join(terms)
    ols = smf.ols(formula, panel).fit(
        cov_type="cluster", cov_kwds={"groups": pd.factorize(panel["group"])[0]}
    )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        mixed = smf.mixedlm(
            formula, panel, groups=panel["group"], vc_formula={"seat": "0 + C(seat)"}, re_formula="1"
        ).fit(reml=True, method=["powell", "lbfgs"])  # Powell first: robust near a zero variance
    for warning in caught:
        notes.append(f"mixed model: {str(warning.message).splitlines()[0]}")
    if not mixed.converged:
        notes.append("mixed model: the optimiser did not report convergence")
    names = list(ols.params.index)
    table = pd.DataFrame({
        "term": names,
        "mixed_coef": mixed.fe_params.reindex(names).to_numpy(),
        "mixed_se": mixed.bse_fe.reindex(names).to_numpy(),
        "mixed_p": mixed.pvalues.reindex(names).to_numpy(),
        "ols_coef": ols.params.to_numpy(),
        "ols_cluster_se": ols.bse.to_numpy(),
        "ols_p": ols.pvalues.to_numpy(),
    })
    variance = pd.DataFrame({
        "term": ["group variance", "seat variance", "residual variance"],
        "mixed_coef": [float(mixed.cov_re.iloc[0, 0]), float(mixed.vcomp[0]), float(mixed.scale)],
    })
    return PanelModels(
        table=pd.concat([table, variance], ignore_index=True),
        formula=formula,
        observations=int(ols.nobs),
        groups=int(panel["group"].nunique()),
        seats=int(panel["seat"].nunique()),
        notes=tuple(dict.fromkeys(notes)),
    )
