"""Fit a behaviour model to real (or pooled, or piloted) play by maximum likelihood.

Every decision of an export folder becomes one observation, rebuilt from the
tables as the seat saw it: the round, the stock, its own and its group's take last
round, and what the treatment said (``treatments.danger_info`` on the group's
state, so the health signal is recomputed from the stock path). The model's
``log_prob`` scores what each seat asked; scipy's bounded quasi-Newton search
(L-BFGS-B) maximises the sum, and standard errors come from the inverse of the
numerical Hessian of the negative log-likelihood at the optimum (statsmodels'
``approx_hess``). A parameter the data cannot inform (e.g. ``caution`` without
any range or signal block) is left at its default and reported as fixed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray
from scipy.optimize import minimize
from statsmodels.tools.numdiff import approx_hess

from ebbtide.game_logic.behaviour import Danger, Model, Observation, make_model
from ebbtide.game_logic.rounds import GroupState, Regime
from ebbtide.game_logic.study import Study
from ebbtide.game_logic.treatments import danger_info

from .exports_reader import ExportData

FITTABLE = ("conditional", "logit", "threshold-averse")


@dataclass(frozen=True)
class Decisions:
    """Observations and asks of one study's decisions (one row per decision, one seat column)."""

    study: Study
    obs: Observation
    asked: NDArray[np.int64]
    groups: int


def decisions_of(data: ExportData) -> list[Decisions]:
    """The decisions of every session in an export folder, as their seats saw them."""
    found = []
    studies = data.studies()
    for session_id, study in studies.items():
        rounds = data.rounds[data.rounds["session_id"] == session_id]
        decisions = data.decisions[data.decisions["session_id"] == session_id]
        if decisions.empty:
            continue
        found.append(_session_decisions(study, rounds, decisions))
    return found


def _group_index(code: str) -> int:
    return int(code.lstrip("G")) - 1


def _session_decisions(study: Study, rounds: pd.DataFrame, decisions: pd.DataFrame) -> Decisions:
    rounds = rounds.sort_values(["group_id", "block", "round"])
    info: dict[tuple[str, int, int], dict] = {}
    total: dict[tuple[str, int, int], float] = {}
    for (group_id, block), cell in rounds.groupby(["group_id", "block"], sort=False):
        path: list[int] = []
        static = None
        for row in cell.itertuples():
            path.append(int(row.stock_before))
            key = (group_id, block, int(row.round))
            total[key] = float(row.total_taken)
            if static is not None:
                info[key] = static
                continue
            threshold = None if row.threshold == "" or pd.isna(row.threshold) else float(row.threshold)
            state = GroupState(group=_group_index(group_id), block=int(block) - 1, round=int(row.round) - 1,
                               stock=int(row.stock_before), regime=Regime.GOOD, threshold=threshold,
                               stock_path=tuple(path))
            info[key] = danger_info(study, state)
            if info[key]["kind"] != "signal":  # only the signal changes within a block
                static = info[key]
    d = decisions.sort_values(["seat_id", "block", "round"])
    own = dict(zip(zip(d["seat_id"], d["block"], d["round"], strict=True), d["harvest_taken"], strict=True))
    keys = list(zip(d["group_id"], d["block"], d["round"], strict=True))
    own_last = [own.get((s, b, r - 1), np.nan) for s, b, r in zip(d["seat_id"], d["block"], d["round"],
                                                                   strict=True)]
    group_last = [total.get((g, b, r - 1), np.nan) for g, b, r in keys]
    obs = Observation(
        round=d["round"].to_numpy(np.int64), stock=d["stock_before"].to_numpy(np.int64),
        own_last=np.array(own_last, dtype=float)[:, None],
        group_last=np.array(group_last, dtype=float)[:, None],
        danger=Danger.from_infos([info[k] for k in keys]),
    )
    return Decisions(study, obs, d["harvest_asked"].to_numpy(np.int64)[:, None], d["group_id"].nunique())


def log_likelihood(model: Model, obs: Observation, asked: NDArray[np.int64]) -> float:
    """Sum of log probabilities of what every seat asked."""
    return float(np.sum(model.log_prob(obs, asked)))


@dataclass(frozen=True)
class Fit:
    """A fitted model: estimates, standard errors and a summary of the fit."""

    model: str
    estimates: dict[str, float]
    standard_errors: dict[str, float]
    fixed: dict[str, float]
    log_likelihood: float
    null_log_likelihood: float
    decisions: int
    groups: int
    sessions: int
    converged: bool
    message: str

    @property
    def aic(self) -> float:
        return 2 * len(self.estimates) - 2 * self.log_likelihood

    @property
    def pseudo_r2(self) -> float:
        """McFadden's pseudo R-squared against uniform choice over 0..cap."""
        return 1 - self.log_likelihood / self.null_log_likelihood

    def summary(self) -> list[str]:
        lines = [f"model {self.model}: {self.decisions} decisions of {self.groups} groups in "
                 f"{self.sessions} session(s); " + ("converged" if self.converged else
                                                    f"NOT converged ({self.message})")]
        for name, value in self.estimates.items():
            se = self.standard_errors[name]
            shown = "at a bound, no s.e." if np.isnan(se) else f"s.e. {se:.4g}"
            lines.append(f"  {name} = {value:.4g}  ({shown})")
        for name, value in self.fixed.items():
            lines.append(f"  {name} = {value:.4g}  (fixed: the data say nothing about it)")
        lines.append(f"log-likelihood {self.log_likelihood:.2f}; uniform choice "
                     f"{self.null_log_likelihood:.2f}; McFadden pseudo R2 {self.pseudo_r2:.3f}; "
                     f"AIC {self.aic:.1f}")
        return lines

    def parameter_tables(self) -> dict[str, dict]:
        return {
            "standard_errors": {k: float(v) for k, v in self.standard_errors.items()},
            "fit": {"decisions": self.decisions, "groups": self.groups, "sessions": self.sessions,
                    "log_likelihood": self.log_likelihood, "pseudo_r2": self.pseudo_r2,
                    "converged": str(self.converged).lower()},
        }


def fit_model(name: str, data: ExportData | list[Decisions]) -> Fit:
    """Maximum-likelihood estimates of model ``name`` from an export folder's decisions."""
    if name not in FITTABLE:
        raise ValueError(f"model {name!r} has nothing to estimate; allowed: {', '.join(FITTABLE)}")
    parts = decisions_of(data) if isinstance(data, ExportData) else data
    if not parts:
        raise ValueError("the export holds no decisions to fit")
    models = [make_model(name, p.study) for p in parts]
    free: list[str] = []
    for m, p in zip(models, parts, strict=True):
        free += [k for k in m.identified(p.obs) if k not in free]
    start = dict(models[0].parameters)
    if name == "conditional" and start["start"] is None:
        start["start"] = float(models[0].setting.share)
    bounds = [type(models[0]).bounds[k] for k in free]

    def negative(theta: NDArray[np.float64]) -> float:
        values = dict(zip(free, (float(t) for t in theta), strict=True))
        total = sum(log_likelihood(m.with_parameters(**values), p.obs, p.asked)
                    for m, p in zip(models, parts, strict=True))
        return -total if np.isfinite(total) else 1e300

    x0 = np.array([start[k] for k in free], dtype=float)
    found = minimize(negative, x0, method="L-BFGS-B", bounds=bounds)
    estimate = found.x
    errors = np.full(estimate.size, np.nan)
    inner = np.array([lo < v < hi for v, (lo, hi) in zip(estimate, bounds, strict=True)])
    if inner.any():
        # Hessian over the parameters off their bounds, the others held at their estimates.
        def inner_negative(sub):
            full = estimate.copy()
            full[inner] = sub
            return negative(full)

        with np.errstate(invalid="ignore"):
            covariance = np.linalg.pinv(approx_hess(estimate[inner], inner_negative))
            errors[inner] = np.sqrt(np.where(np.diag(covariance) > 0, np.diag(covariance), np.nan))
    cap = np.array([p.study.resource.max_harvest for p in parts])
    null = -sum(p.asked.size * np.log(c + 1) for p, c in zip(parts, cap, strict=True))
    fixed = {k: v for k, v in start.items() if k not in free and v is not None}
    return Fit(
        model=name,
        estimates={k: float(v) for k, v in zip(free, estimate, strict=True)},
        standard_errors={k: float(e) for k, e in zip(free, errors, strict=True)},
        fixed=fixed, log_likelihood=-float(found.fun), null_log_likelihood=float(null),
        decisions=int(sum(p.asked.size for p in parts)), groups=int(sum(p.groups for p in parts)),
        sessions=len(parts), converged=bool(found.success), message=str(found.message),
    )
