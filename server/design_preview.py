"""The design preview: one self-contained HTML page to look at a study before the trip.

The regrowth curve with the danger band and the recovery level (the hysteresis), the
stock paths of simulated groups under each behaviour model, the power curve, the cash
budget and the length of the day, and one phone screen per treatment drawn by the real
gauge code from a participant view. Figures are base64 PNG (matplotlib) or inline SVG
(the gauges); the page loads nothing from anywhere.
"""

from __future__ import annotations

import base64
import io
import math
import tempfile
from dataclasses import dataclass
from pathlib import Path

import jinja2
import numpy as np

from ebbtide.analysis.power import PowerCurve, draw_power_curve, study_power
from ebbtide.game_logic.behaviour import Model
from ebbtide.game_logic.budget import CashBudget, cash_budget
from ebbtide.game_logic.design_review import design_summary, expected_minutes
from ebbtide.game_logic.pilot import RoundStep, play
from ebbtide.game_logic.resource import growth
from ebbtide.game_logic.rounds import start_block
from ebbtide.game_logic.study import Study, label_texts
from ebbtide.game_logic.treatments import participant_view
from ebbtide.server.pictures.gauge import stock_gauge_svg

PATH_GROUPS = 12  # simulated groups drawn per model


@dataclass(frozen=True)
class Picture:
    title: str
    alt: str
    png: bytes

    @property
    def data_uri(self) -> str:
        return "data:image/png;base64," + base64.b64encode(self.png).decode("ascii")


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _png(fig) -> bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110)
    _pyplot().close(fig)
    return buffer.getvalue()


def threshold_range(study: Study) -> tuple[float, float] | None:
    """Lowest and highest value the hidden threshold can take; None without a threshold."""
    t = study.threshold
    if t.rule == "fixed":
        return t.value, t.value
    if t.rule == "uniform":
        return t.low, t.high
    return None


def regrowth_figure(study: Study) -> Picture:
    """Regrowth per round against the stock left, in both regimes, with the danger band and recovery level."""
    plt = _pyplot()
    resource, t = study.resource, study.threshold
    x = np.linspace(0, resource.capacity, 400)
    good = growth(x, resource.growth, resource.capacity)
    degraded = np.where(good > 0, resource.degraded_growth_factor * good, good)
    fig, ax = plt.subplots(figsize=(8, 3.8))
    ax.plot(x, good, color="#2f6f73", linewidth=2.2, label="good regime")
    ax.plot(x, degraded, color="#a0461e", linewidth=2.2, linestyle="--", label="degraded regime")
    ax.axhline(0, color="0.6", linewidth=0.8)
    band = threshold_range(study)
    if band is not None:
        low, high = band
        if high > low:
            ax.axvspan(low, high, color="#e8a33d", alpha=0.35, label="danger band (threshold drawn here)")
        else:
            ax.axvline(low, color="#e8a33d", linewidth=3, label=f"threshold {low:g}")
        ax.axvspan(high, high + t.recovery_gap, color="#3b7d3b", alpha=0.08)
        ax.axvline(high + t.recovery_gap, color="#3b7d3b", linestyle=":", linewidth=2,
                   label=f"recovery level (threshold + {t.recovery_gap:g})")
        top = ax.get_ylim()[1]
        ax.annotate("", xy=(low, top * 0.85), xytext=(high + t.recovery_gap, top * 0.85),
                    arrowprops={"arrowstyle": "<->", "color": "0.3"})
        ax.text((low + high + t.recovery_gap) / 2, top * 0.88, "hysteresis", ha="center",
                fontsize=8, color="0.3")
    ax.set_xlabel(f"stock left after the harvest ({resource.unit})")
    ax.set_ylabel("regrowth per round")
    flip = "" if band is None else f"; below the threshold the stock flips with chance {t.flip_probability:g}"
    ax.set_title(f"Regrowth ({resource.growth.law}){flip}", fontsize=9)
    ax.legend(fontsize=7, loc="lower center", frameon=False, ncols=2)
    fig.tight_layout()
    return Picture("Regrowth, danger band and recovery level",
                   "Regrowth per round against the stock left, good and degraded regimes, with the danger "
                   "band and the recovery level", _png(fig))


def simulated_paths(study: Study, model: Model, seed: int, groups: int = PATH_GROUPS):
    """Stock after each round of ``groups`` groups, (groups, rounds of all blocks); NaN after a stop."""
    offsets = np.concatenate([[0], np.cumsum([b.rounds for b in study.blocks])])
    paths = np.full((groups, int(offsets[-1])), np.nan)
    treatments = {}

    def record(step: RoundStep) -> None:
        paths[step.rows, offsets[step.block] + step.round - 1] = step.result.stock_after

    play(study, model, seed, np.arange(groups), record, live_draws=False)
    for g in range(groups):
        treatments[g] = "/".join(b.treatment_for(g) for b in study.blocks)
    return paths, offsets, treatments


def paths_figure(study: Study, models: list[Model], seed: int) -> Picture:
    plt = _pyplot()
    from matplotlib.ticker import MaxNLocator

    columns = min(3, len(models))
    rows = math.ceil(len(models) / columns)
    fig, axes = plt.subplots(rows, columns, figsize=(4 * columns, 2.6 * rows), sharey=True, squeeze=False)
    band = threshold_range(study)
    palette = ["#2f6f73", "#a0461e", "#6a4c93", "#3b7d3b", "#b7791f", "#444444"]
    for ax, model in zip(axes.flat, models, strict=False):
        paths, offsets, treatments = simulated_paths(study, model, seed)
        names = sorted(set(treatments.values()))
        for g, path in enumerate(paths):
            ax.plot(np.arange(1, path.size + 1), path, linewidth=1,
                    color=palette[names.index(treatments[g]) % len(palette)], alpha=0.8)
        if band is not None:
            ax.axhspan(band[0], max(band[1], band[0] + 0.5), color="#e8a33d", alpha=0.3)
        for edge in offsets[1:-1]:
            ax.axvline(edge + 0.5, color="0.5", linewidth=0.8, linestyle=":")
        ax.set_title(model.name, fontsize=9)
        ax.set_ylim(0, study.resource.capacity * 1.02)
        ax.set_xlabel("round", fontsize=8)
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    for ax in list(axes.flat)[len(models):]:
        ax.axis("off")
    handles = [plt.Line2D([], [], color=palette[i % len(palette)], label=name)
               for i, name in enumerate(sorted({"/".join(b.treatment_for(g) for b in study.blocks)
                                                for g in range(PATH_GROUPS)}))]
    fig.legend(handles=handles, fontsize=7, loc="lower center", ncols=len(handles), frameon=False,
               title="treatment (per block)", title_fontsize=7)
    axes[0, 0].set_ylabel(f"stock ({study.resource.unit})")
    fig.tight_layout(rect=(0, 0.08, 1, 1))
    return Picture("Stock paths of simulated groups under each model",
                   f"Stock after each round of {PATH_GROUPS} simulated groups per behaviour model, "
                   "coloured by treatment, with the danger band", _png(fig))


def preview_power(study: Study, model: Model, sims: int, seed: int) -> PowerCurve | None:
    """A quick power curve at a few group counts around the planned one; None when nothing is planned."""
    rotation = math.lcm(*(len(b.all_treatments) for b in study.blocks))
    step = max(rotation, 2)
    counts = sorted({step * k for k in range(1, 6)} | {max(study.groups.count, 2)})
    try:
        curve, _ = study_power(study, model, counts, sims, seed=seed, progress=False)
    except ValueError:
        return None
    return curve


def power_figure(curve: PowerCurve) -> Picture:
    with tempfile.TemporaryDirectory() as folder:
        stem = str(Path(folder) / "power-curve")
        draw_power_curve(curve, stem)
        png = Path(stem + ".png").read_bytes()
    return Picture("Power by simulation", "Power of each planned comparison against the number of groups",
                   png)


def phone_screens(study: Study, seed: int) -> list[dict]:
    """One gauge per treatment (first block that uses it), drawn from seat 1's participant view."""
    screens, seen = [], set()
    for b, block in enumerate(study.blocks):
        for g in range(len(block.all_treatments)):
            treatment = block.treatment_for(g)
            if treatment in seen:
                continue
            seen.add(treatment)
            view = participant_view(study, start_block(study, seed, g, b), 0, None, 0.0)
            screens.append({
                "treatment": treatment, "block": b + 1, "round": view["round"],
                "title": label_texts(study.session.label).get(study.session.language, study.session.title),
                "svg": stock_gauge_svg(view, id_prefix=f"preview{len(screens) + 1}"),
            })
    return screens


def _cash(amount) -> str:
    return format(amount.normalize(), "f")


def build_page(study: Study, models: list[Model], power_model: Model, seed: int = 1, sessions: int = 300,
               power_sims: int = 100, budgets: list[CashBudget] | None = None) -> str:
    """The whole preview page as HTML text; ``budgets`` (one per model) are computed unless given."""
    budgets = budgets or [cash_budget(study, model, sessions=sessions, seed=seed) for model in models]
    rows = []
    for model, b in zip(models, budgets, strict=True):
        rows.append({
            "model": model.name, "minimum": _cash(b.minimum), "expected": _cash(b.expected),
            "high": _cash(b.high), "maximum": _cash(b.maximum), "quantile": f"{b.quantile:.0%}",
            "packing": ", ".join(f"{k} x {_cash(v)}" for v, k in b.packing.items()),
            "median_minutes": f"{np.median(b.minutes):.0f}",
            "high_minutes": f"{np.quantile(b.minutes, 0.95):.0f}",
        })
    curve = preview_power(study, power_model, power_sims, seed)
    pictures = [regrowth_figure(study), paths_figure(study, models, seed)]
    power_words = ("The design plans no treatment comparison (one treatment, no block against another): "
                   "no power to estimate.")
    if curve is not None:
        pictures.append(power_figure(curve))
        reached = curve.groups_for(0.8)
        power_words = "; ".join(
            f"{label}: 80 % power "
            + (f"at {n} groups" if n else f"not reached with {curve.groups[-1]} groups")
            for label, n in zip(curve.labels, reached, strict=True))
        power_words = (f"Model {power_model.name}, {curve.sims} simulated studies per point (a quick look; "
                       f"run ebbtide power for the figures to plan with). {power_words}.")
    return PAGE.render(
        study=study, summary=design_summary(study), pictures=pictures, power_words=power_words,
        budgets=rows, currency=study.payment.currency, sessions=sessions, seed=seed,
        minutes=f"{expected_minutes(study):.0f}", screens=phone_screens(study, seed),
    )


PAGE = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined).from_string("""\
<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Design preview: {{ study.session.title }}</title>
<style>
body { font-family: "DejaVu Sans", system-ui, sans-serif; max-width: 72rem; margin: 1.5rem auto;
       padding: 0 1rem; color: #1d2a30; line-height: 1.45; }
h1 { font-size: 1.5rem; border-bottom: 3px solid #2f6f73; padding-bottom: .3rem; }
h2 { font-size: 1.15rem; margin-top: 2rem; color: #2f6f73; }
.caution { background: #fff6e0; border-left: 4px solid #b7791f; padding: .6rem .9rem; }
pre { background: #f3f6f6; padding: .6rem; overflow-x: auto; font-size: .85rem; }
img { max-width: 100%; height: auto; display: block; margin: .5rem 0; }
table { border-collapse: collapse; font-size: .85rem; }
th, td { padding: .25rem .5rem; border-bottom: 1px solid #d6dede; text-align: right; }
th { background: #e7efef; }
td:first-child, th:first-child, td.packing { text-align: left; }
.phones { display: flex; flex-wrap: wrap; gap: 1.2rem; }
.phone { width: 240px; border: 10px solid #1d2a30; border-radius: 22px; padding: .6rem; background: #fff; }
.phone h3 { font-size: .9rem; margin: 0 0 .3rem; }
.phone p { font-size: .75rem; margin: .2rem 0; color: #4a5a60; }
</style></head><body>
<h1>Design preview: {{ study.session.title }}</h1>
<p class="caution">Every number below is simulated under assumed behaviour: a preview of the design, not a
forecast. Payments are real money: carry a margin and follow your institution's rules for cash, consent and
ethics review.</p>
<h2>Design</h2>
<pre>{{ summary | join("\\n") }}</pre>
{% for picture in pictures %}
<section class="figure"><h2>{{ picture.title }}</h2>
<img src="{{ picture.data_uri }}" alt="{{ picture.alt }}">
{% if loop.last and pictures | length == 3 %}<p>{{ power_words }}</p>{% endif %}
</section>
{% endfor %}
{% if pictures | length < 3 %}<h2>Power by simulation</h2><p>{{ power_words }}</p>{% endif %}
<h2>Cash and the length of the day</h2>
<p>{{ sessions }} simulated sessions per model, seed {{ seed }}; amounts in {{ currency }}, show-up fee
included. If every round is played the day takes {{ minutes }} minutes (setup, rounds, talk pauses,
debrief).</p>
<table><thead><tr><th>model</th><th>minimum</th><th>expected</th><th>bring (high quantile)</th>
<th>maximum</th><th>notes and coins for the high quantile</th><th>day, median (min)</th>
<th>day, 95 % within (min)</th></tr></thead><tbody>
{% for b in budgets %}<tr><td>{{ b.model }}</td><td>{{ b.minimum }}</td><td>{{ b.expected }}</td>
<td>{{ b.high }} ({{ b.quantile }})</td><td>{{ b.maximum }}</td><td class="packing">{{ b.packing }}</td>
<td>{{ b.median_minutes }}</td><td>{{ b.high_minutes }}</td></tr>{% endfor %}
</tbody></table>
<h2>What the phones show, per treatment</h2>
<p>The stock gauge of seat 1 at the start of the first block that uses each treatment, drawn by the phone's
own gauge code (English words; phones use the participant's language).</p>
<div class="phones">
{% for s in screens %}<figure class="phone" data-treatment="{{ s.treatment }}">
<h3>{{ s.title }}</h3><p>treatment {{ s.treatment }}, block {{ s.block }}</p>
{{ s.svg | safe }}
</figure>{% endfor %}
</div>
</body></html>
""")


def write_preview(path: str | Path, study: Study, models: list[Model], power_model: Model, seed: int = 1,
                  sessions: int = 300, power_sims: int = 100,
                  budgets: list[CashBudget] | None = None) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    page = build_page(study, models, power_model, seed, sessions, power_sims, budgets)
    path.write_text(page, encoding="utf-8")
    return path
