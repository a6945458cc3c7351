"""Behaviour models of simulated players: one implementation each, for many seats at once.

The pilot, the rehearsal bots, the power analysis and the fitting all call the
same two methods of a model:

- ``ask(obs, u)``: whole units asked by every seat, from what the seat sees
  (``Observation``) and one uniform draw per seat (``u`` in [0, 1));
- ``log_prob(obs, asked)``: log probability of what was asked (maximum likelihood).

A seat's draw is the inverse cumulative distribution of its choice at ``u``, so
sampling and likelihood describe one distribution. Each group's uniforms come
from its own generator in the seed tree (``seeding.behaviour_rng``), one per
(seed, group, block): a group plays the same whether 5 or 50 000 groups run, and
a rehearsal bot on seat s of group g draws what the pilot's seat s of group g draws.

Models see only what a phone shows (``treatments.participant_view``): the stock,
their own and the group's take last round, and what the treatment says about
the danger level. Parameters and sources: ``docs/behaviour-models.md``.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, fields, replace
from typing import Any, ClassVar

import numpy as np
from numpy.typing import NDArray
from scipy.special import log_ndtr, logsumexp, ndtri

from .benchmarks import equal_share_of_sustainable_yield
from .seeding import behaviour_rng
from .study import Study

KINDS = ("none", "vague", "range", "exact", "risk", "signal")


@dataclass(frozen=True)
class Danger:
    """What the treatment says about the danger level, one entry per row (group).

    ``kind`` is the treatment's kind (``danger_info``'s ``kind``); numbers are NaN
    where the treatment does not give them; ``band`` is the health signal's band ("" elsewhere).
    Words are numpy string arrays: comparing them is far cheaper than comparing objects.
    """

    kind: NDArray[np.str_]
    level: NDArray[np.float64]
    low: NDArray[np.float64]
    high: NDArray[np.float64]
    flip_probability: NDArray[np.float64]
    band: NDArray[np.str_]

    @classmethod
    def from_infos(cls, infos: Sequence[Mapping[str, Any]]) -> Danger:
        """From ``treatments.danger_info`` dicts (the phone's ``view["danger"]``)."""
        def number(key: str) -> NDArray[np.float64]:
            return np.array([float(i.get(key, np.nan)) for i in infos], dtype=float)

        return cls(
            kind=np.array([i["kind"] for i in infos], dtype=str),
            level=number("level"), low=number("low"), high=number("high"),
            flip_probability=number("flip_probability"),
            band=np.array([i.get("band", "") for i in infos], dtype=str),
        )

    def take(self, rows: NDArray[np.int64]) -> Danger:
        return Danger(*(getattr(self, f.name)[rows] for f in fields(self)))


@dataclass(frozen=True)
class Observation:
    """What seats see before they choose; rows are groups, columns seats.

    ``own_last`` (rows, seats) and ``group_last`` (rows, 1) are last round's units
    taken in this block, NaN before the block's first round. A single seat read
    from its phone is one row and one column.
    """

    round: NDArray[np.int64]
    stock: NDArray[np.int64]
    own_last: NDArray[np.float64]
    group_last: NDArray[np.float64]
    danger: Danger

    @property
    def first_round(self) -> NDArray[np.bool_]:
        return np.isnan(self.group_last[:, 0])


@dataclass(frozen=True)
class Setting:
    """The study's numbers a model needs (seats in a group, harvest cap, ...)."""

    seats: int
    cap: int
    capacity: int
    share: int
    points_per_unit: float

    @classmethod
    def of(cls, study: Study) -> Setting:
        cap = study.resource.max_harvest
        return cls(
            seats=study.seats, cap=cap, capacity=study.resource.capacity,
            share=min(cap, equal_share_of_sustainable_yield(study)),
            points_per_unit=float(study.payment.points_per_unit),
        )


def observation_from_view(view: Mapping[str, Any]) -> Observation:
    """One seat's observation from its participant view (the rehearsal bots)."""
    last = view.get("last_round")
    own = np.nan if last is None else float(last["taken"])
    total = np.nan if last is None else float(last["group_total"])
    return Observation(
        round=np.array([int(view["round"])]),
        stock=np.array([int(view["stock"])]),
        own_last=np.array([[own]]),
        group_last=np.array([[total]]),
        danger=Danger.from_infos([view["danger"]]),
    )


# --- Two choice distributions, each sampled by its inverse CDF and scored by its log pmf -------


def _rounded_normal_sample(mean, sd, u, cap) -> NDArray[np.int64]:
    """A normal wish rounded half up to whole units and clipped to 0..cap."""
    u = np.clip(u, 1e-12, 1 - 1e-12)
    wish = mean + sd * ndtri(u)
    return np.clip(np.floor(wish + 0.5), 0, cap).astype(np.int64)


def _rounded_normal_log_prob(mean, sd, h, cap) -> NDArray[np.float64]:
    """log P(h) of the rounded, clipped normal: the wish falls in [h - 1/2, h + 1/2)."""
    h = np.asarray(h, dtype=float)
    upper = (h + 0.5 - mean) / sd
    lower = (h - 0.5 - mean) / sd
    top = log_ndtr(-lower)  # h == cap: every wish from cap - 1/2 up
    bottom = log_ndtr(upper)  # h == 0: every wish below 1/2
    # Middle values: log(Phi(b) - Phi(a)) computed on the side of the normal that keeps precision.
    flip = lower > 0
    a, b = np.where(flip, -upper, lower), np.where(flip, -lower, upper)
    with np.errstate(divide="ignore"):
        middle = log_ndtr(b) + np.log1p(-np.exp(np.minimum(log_ndtr(a) - log_ndtr(b), 0.0)))
    return np.where(h >= cap, top, np.where(h <= 0, bottom, middle))


# --- The models ------------------------------------------------------------------------------


@dataclass(frozen=True)
class Model:
    """Base of every behaviour model; parameters are the dataclass fields after ``setting``."""

    setting: Setting
    name: ClassVar[str] = ""
    # Parameters the fitting estimates, with their bounds.
    bounds: ClassVar[dict[str, tuple[float, float]]] = {}
    # Whether choices depend on the health signal's band (costly to compute for every round).
    reads_signal: ClassVar[bool] = False
    # Whether ``ask`` reads its uniforms (the pilot need not draw them for a fixed choice).
    uses_uniforms: ClassVar[bool] = True

    def ask(self, obs: Observation, u: NDArray[np.float64]) -> NDArray[np.int64]:
        raise NotImplementedError

    def log_prob(self, obs: Observation, asked: NDArray[np.int64]) -> NDArray[np.float64]:
        raise NotImplementedError

    @property
    def parameters(self) -> dict[str, float]:
        return {f.name: getattr(self, f.name) for f in fields(self) if f.name != "setting"}

    def with_parameters(self, **values: float) -> Model:
        return replace(self, **values)

    def identified(self, obs: Observation) -> tuple[str, ...]:
        """Parameters the observations can tell anything about (all by default)."""
        return tuple(self.bounds)


@dataclass(frozen=True)
class Selfish(Model):
    """Myopic best response: a round's points rise with the units taken, so ask the cap."""

    name: ClassVar[str] = "selfish"
    uses_uniforms: ClassVar[bool] = False

    def ask(self, obs, u):
        return np.full(u.shape, self.setting.cap, dtype=np.int64)

    def log_prob(self, obs, asked):
        return np.where(np.asarray(asked) == self.setting.cap, 0.0, -np.inf)


@dataclass(frozen=True)
class SustainableShare(Model):
    """Everyone asks floor(MSY / seats): the group never takes more than the sustainable yield."""

    name: ClassVar[str] = "sustainable"
    uses_uniforms: ClassVar[bool] = False

    def ask(self, obs, u):
        return np.full(u.shape, self.setting.share, dtype=np.int64)

    def log_prob(self, obs, asked):
        return np.where(np.asarray(asked) == self.setting.share, 0.0, -np.inf)


@dataclass(frozen=True)
class ConditionalCooperator(Model):
    """Moves towards what the others took last round, with noise.

    Round 1: a wish of ``start`` units (default: the equal share of the sustainable
    yield). Later: ``(1 - weight) * own_last + weight * others_mean`` where
    ``others_mean = (group_last - own_last) / (seats - 1)``; normal noise with sd
    ``noise``; rounded half up and clipped to 0..cap.
    """

    name: ClassVar[str] = "conditional"
    bounds: ClassVar[dict[str, tuple[float, float]]] = {
        "start": (0.0, 100.0), "weight": (0.0, 1.5), "noise": (0.05, 50.0),
    }
    start: float | None = None
    weight: float = 1.0
    noise: float = 1.0

    def mean(self, obs: Observation) -> NDArray[np.float64]:
        start = self.setting.share if self.start is None else self.start
        seats = self.setting.seats
        others = (obs.group_last - obs.own_last) / max(1, seats - 1)
        follow = (1 - self.weight) * obs.own_last + self.weight * others
        return np.where(obs.first_round[:, None], float(start), follow)

    def ask(self, obs, u):
        return _rounded_normal_sample(self.mean(obs), self.noise, u, self.setting.cap)

    def log_prob(self, obs, asked):
        return _rounded_normal_log_prob(self.mean(obs), self.noise, asked, self.setting.cap)

    def identified(self, obs):
        first = obs.first_round
        names = ["noise"]
        if first.any():
            names.insert(0, "start")
        if (~first).any():
            names.insert(-1, "weight")
        return tuple(names)


@dataclass(frozen=True)
class LogitResponse(Model):
    """Logit (quantal) response to the round's own points (McKelvey & Palfrey 1995).

    P(h) = exp(precision * u(h)) / sum_k exp(precision * u(k)), h = 0..cap, with
    u(h) = points_per_unit * h, the myopic payoff of asking h. ``precision`` 0 is
    uniform choice; a large precision approaches the selfish best response.
    """

    name: ClassVar[str] = "logit"
    bounds: ClassVar[dict[str, tuple[float, float]]] = {"precision": (-20.0, 20.0)}
    precision: float = 0.3

    def log_pmf(self) -> NDArray[np.float64]:
        utility = self.precision * self.setting.points_per_unit * np.arange(self.setting.cap + 1)
        return utility - logsumexp(utility)

    def ask(self, obs, u):
        cdf = np.cumsum(np.exp(self.log_pmf()))
        return np.minimum(np.searchsorted(cdf, u, side="right"), self.setting.cap).astype(np.int64)

    def log_prob(self, obs, asked):
        asked = np.asarray(asked, dtype=np.int64)
        inside = (asked >= 0) & (asked <= self.setting.cap)
        return np.where(inside, self.log_pmf()[np.clip(asked, 0, self.setting.cap)], -np.inf)


@dataclass(frozen=True)
class ThresholdAverse(Model):
    """Keeps the group's remainder above the danger level it is told of, as far as it is told.

    The seat aims at a remainder of ``target + margin`` and asks its share of the
    rest, ``(stock - target - margin) / seats``, clipped to 0..cap, with normal
    noise (sd ``noise``), rounded half up. The target depends on the treatment:

    - none: no danger known; the wish is the cap (myopic);
    - vague: a danger level exists; target ``vague_level * capacity``;
    - range: ``low + caution * (high - low)`` (0 hopes for the best, 1 fears the worst);
    - exact: the level told;
    - risk: the level told, but the restrained wish is weighted by the chance the
      crossing flips the stock: ``p * restrained + (1 - p) * cap``;
    - signal: calm asks the cap; watch asks the equal share of the sustainable
      yield; alarm asks ``(1 - caution)`` times that share.
    """

    name: ClassVar[str] = "threshold-averse"
    reads_signal: ClassVar[bool] = True
    bounds: ClassVar[dict[str, tuple[float, float]]] = {
        "margin": (-50.0, 100.0), "caution": (0.0, 1.0), "vague_level": (0.0, 1.0), "noise": (0.05, 50.0),
    }
    margin: float = 5.0
    caution: float = 0.5
    vague_level: float = 0.3
    noise: float = 1.0

    def mean(self, obs: Observation) -> NDArray[np.float64]:
        s, d = self.setting, obs.danger
        target = np.select(
            [d.kind == "vague", d.kind == "range", (d.kind == "exact") | (d.kind == "risk")],
            [np.full(d.level.shape, self.vague_level * s.capacity),
             d.low + self.caution * (d.high - d.low), d.level],
            default=np.nan,
        )
        restrained = np.clip((obs.stock - target - self.margin) / s.seats, 0, s.cap)
        p = np.where(d.kind == "risk", d.flip_probability, 1.0)
        told = np.where(np.isnan(target), float(s.cap), p * restrained + (1 - p) * s.cap)
        signal = np.select([d.band == "alarm", d.band == "watch"],
                           [(1 - self.caution) * s.share, float(s.share)], default=float(s.cap))
        wish = np.where(d.kind == "signal", signal, told)
        return np.broadcast_to(wish[:, None], obs.own_last.shape)

    def ask(self, obs, u):
        return _rounded_normal_sample(self.mean(obs), self.noise, u, self.setting.cap)

    def log_prob(self, obs, asked):
        return _rounded_normal_log_prob(self.mean(obs), self.noise, asked, self.setting.cap)

    def identified(self, obs):
        kinds = set(obs.danger.kind.tolist())
        names = []
        if kinds & {"vague", "range", "exact", "risk"}:
            names.append("margin")
        if "range" in kinds or "signal" in kinds:
            names.append("caution")
        if "vague" in kinds:
            names.append("vague_level")
        return (*names, "noise")


MODELS: dict[str, type[Model]] = {
    m.name: m for m in (Selfish, SustainableShare, ConditionalCooperator, LogitResponse, ThresholdAverse)
}
# Older names kept for the pilot's and rehearsal's ``--strategy`` option.
ALIASES = {"max": "selfish"}
MODEL_NAMES = tuple(MODELS)


def make_model(name: str, study: Study, parameters: Mapping[str, float] | None = None) -> Model:
    """The named model for a study; ``ValueError`` names the allowed models or parameters."""
    key = ALIASES.get(name, name)
    if key not in MODELS:
        raise ValueError(f"unknown behaviour model {name!r}; allowed: {', '.join(MODEL_NAMES)}")
    cls = MODELS[key]
    allowed = [f.name for f in fields(cls) if f.name != "setting"]
    unknown = sorted(set(parameters or {}) - set(allowed))
    if unknown:
        raise ValueError(
            f"model {key!r} has no parameter {', '.join(unknown)}; allowed: {', '.join(allowed) or 'none'}"
        )
    clean = {k: float(v) for k, v in (parameters or {}).items()}
    return cls(Setting.of(study), **clean)


def seat_uniforms(seed: int, group: int, block: int, rounds: int, seats: int) -> NDArray[np.float64]:
    """The (rounds, seats) uniforms of one group's simulated players in one block (0-based)."""
    return behaviour_rng(seed, group, block).random((rounds, seats))


def choose_from_view(model: Model, study: Study, view: Mapping[str, Any], seed: int, group: int) -> int:
    """One simulated seat's harvest from its participant view (the rehearsal bots).

    ``group`` is 0-based (the seat card's group); the seat, block and round are read
    from the view. The draw is the one the pilot gives the same seat of the same group.
    """
    block, round_number, seat = int(view["block"]) - 1, int(view["round"]), int(view["seat"]) - 1
    u = seat_uniforms(seed, group, block, study.blocks[block].rounds, study.seats)[round_number - 1, seat]
    return int(model.ask(observation_from_view(view), np.array([[u]]))[0, 0])


def read_parameter_file(text: str, where: str = "parameter file") -> tuple[str, dict[str, float]]:
    """Model name and parameters from a parameter file's TOML text (``ebbtide fit`` writes them)."""
    import tomllib

    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{where}: not valid TOML: {exc}") from exc
    name = raw.get("model")
    if not isinstance(name, str):
        raise ValueError(f"{where}: needs a line model = \"NAME\"; allowed names: {', '.join(MODEL_NAMES)}")
    parameters = raw.get("parameters", {})
    if not isinstance(parameters, dict) or not all(
        isinstance(v, (int, float)) and not isinstance(v, bool) for v in parameters.values()
    ):
        raise ValueError(f"{where}: [parameters] must hold numbers only, e.g. noise = 1.5")
    return name, {k: float(v) for k, v in parameters.items()}


def parameter_file_text(name: str, parameters: Mapping[str, float | None],
                        **tables: Mapping[str, float | int | str]) -> str:
    """TOML text of a parameter file; extra ``tables`` (standard errors, fit summary) ride along."""
    def value(v) -> str:
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
        if isinstance(v, float) and not np.isfinite(v):
            return '"nan"' if np.isnan(v) else ('"inf"' if v > 0 else '"-inf"')
        return repr(v) if isinstance(v, float) else str(v)

    lines = [f"model = {value(name)}", "", "[parameters]"]
    lines += [f"{k} = {value(float(v))}" for k, v in parameters.items() if v is not None]
    for table, entries in tables.items():
        lines += ["", f"[{table}]"] + [f"{k} = {value(v)}" for k, v in entries.items()]
    return "\n".join(lines) + "\n"


def load_model(spec: str, study: Study) -> Model:
    """A model from a NAME, or from a parameter FILE written by ``ebbtide fit`` (one-line errors)."""
    from pathlib import Path

    if ALIASES.get(spec, spec) in MODELS:
        return make_model(spec, study)
    path = Path(spec)
    if not path.is_file():
        raise ValueError(f"--model holds {spec!r}: neither a model name ({', '.join(MODEL_NAMES)}) "
                         "nor a parameter file")
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ValueError(f"cannot read {spec}: {exc}") from exc
    name, parameters = read_parameter_file(text, spec)
    try:
        return make_model(name, study, parameters)
    except ValueError as exc:
        raise ValueError(f"{spec}: {exc}") from exc
