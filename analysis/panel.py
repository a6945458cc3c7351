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
import statsmodels.api as sm
import statsmodels.formula.api as smf


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
    """Seat-round rows with ``lagged_stock`` and ``others_lag``; first rounds dropped.

    ``group`` and ``seat`` are integer codes unique across pooled sessions
    (grouping on integers keeps a million-row panel fast).
    """
    group = decisions.groupby(["session_id", "group_id"], sort=True).ngroup().to_numpy()
    seat = decisions.groupby(["session_id", "group_id", "seat_id"], sort=True).ngroup().to_numpy()
    block, round_ = decisions["block"].to_numpy(), decisions["round"].to_numpy()
    order = np.lexsort((round_, block, seat))
    columns = ["session_id", "group_id", "seat_id", "block", "treatment", "round", "stock_before",
               "harvest_asked", "harvest_taken"]
    data = {c: decisions[c].to_numpy()[order] for c in columns}
    data["group"], data["seat"] = group[order], seat[order]
    taken = data["harvest_taken"].astype(float)
    blocks, span = int(data["block"].max()) + 1, int(data["round"].max()) + 1
    cell = (data["group"].astype(np.int64) * blocks + data["block"]) * span + data["round"]
    codes = pd.factorize(cell)[0]
    totals = np.bincount(codes, weights=taken)[codes]
    seats = np.bincount(codes)[codes]
    with np.errstate(invalid="ignore", divide="ignore"):
        others_now = np.where(seats > 1, (totals - taken) / (seats - 1), np.nan)
    # Rows are sorted by seat, block and round: the previous row is the seat's previous round
    # when it has the same seat and block and the round just before.
    same = np.zeros(len(order), dtype=bool)
    same[1:] = ((data["seat"][1:] == data["seat"][:-1]) & (data["block"][1:] == data["block"][:-1])
                & (data["round"][1:] == data["round"][:-1] + 1))
    others_lag = np.full(len(order), np.nan)
    others_lag[1:] = others_now[:-1]
    keep = same & ~np.isnan(others_lag)
    panel = pd.DataFrame({c: v[keep] for c, v in data.items()})
    panel["others_lag"] = others_lag[keep]
    panel["lagged_stock"] = panel["stock_before"]
    panel["harvest"] = panel["harvest_asked"].astype(float)
    return panel


def _dummies(values: pd.Series, name: str) -> pd.DataFrame:
    """Treatment-coded dummies, the first level (sorted) the base, named as patsy names them."""
    levels = sorted(values.unique())
    return pd.DataFrame(
        {f"C({name})[T.{level}]": (values == level).to_numpy(float) for level in levels[1:]},
        index=values.index,
    )


def design_matrix(panel: pd.DataFrame, terms: list[str]) -> pd.DataFrame:
    """Intercept, dummies and numeric regressors, without a formula parser (fast on large panels)."""
    parts = [pd.DataFrame({"Intercept": np.ones(len(panel))}, index=panel.index)]
    for term in terms:
        if term.startswith("C("):
            name = term[2:-1]
            parts.append(_dummies(panel[name], name))
        else:
            parts.append(panel[[term]].astype(float))
    return pd.concat(parts, axis=1)


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
        matrix = design_matrix(panel, chosen + [term] + base).to_numpy()
        if np.linalg.matrix_rank(matrix) == matrix.shape[1]:
            chosen.append(term)
        else:
            notes.append(f"{term} left out: collinear with the terms before it (one treatment per block?)")
    return chosen + base, notes


# MixedLM's likelihood loops over groups in Python; above this many groups it would take
# minutes and gigabytes, and the cluster-robust OLS carries the inference alone.
MIXED_MODEL_MAX_GROUPS = 400


def fit_panel_models(decisions: pd.DataFrame, mixed_max_groups: int = MIXED_MODEL_MAX_GROUPS) -> PanelModels:
    """Fit both models; harvest is the units a seat asked (its decision, before rationing)."""
    panel = panel_frame(decisions)
    terms, notes = _terms(panel)
    formula = "harvest ~ " + " + ".join(terms)
    ols = sm.OLS(panel["harvest"], design_matrix(panel, terms)).fit(
        cov_type="cluster", cov_kwds={"groups": panel["group"].to_numpy()}
    )
    groups = int(panel["group"].nunique())
    if groups > mixed_max_groups:
        notes.append(f"mixed model not fitted: {groups} groups is more than {mixed_max_groups}; "
                     "the OLS with group-clustered errors carries the inference")
        return _ols_only(ols, panel, formula, notes)
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


def _ols_only(ols, panel: pd.DataFrame, formula: str, notes: list[str]) -> PanelModels:
    nan = np.full(len(ols.params), np.nan)
    table = pd.DataFrame({
        "term": list(ols.params.index), "mixed_coef": nan, "mixed_se": nan, "mixed_p": nan,
        "ols_coef": ols.params.to_numpy(), "ols_cluster_se": ols.bse.to_numpy(),
        "ols_p": ols.pvalues.to_numpy(),
    })
    return PanelModels(table=table, formula=formula, observations=int(ols.nobs),
                       groups=int(panel["group"].nunique()), seats=int(panel["seat"].nunique()),
                       notes=tuple(dict.fromkeys(notes)))
