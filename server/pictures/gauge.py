"""The stock picture on a phone: an inline SVG gauge drawn from a participant view.

Pure on purpose: a function of the dict that ``game_logic.treatments.participant_view``
returns, so it can only draw what that gate lets a phone see, and tests need no app.
The visual language is written up in ``docs/treatments.md``: large numerals on
white, a dark blue stock bar, orange/vermillion danger marks (a palette that
stays apart under the common colour-vision deficiencies), and every mark also
carries a pattern, a shape or a word, never colour alone.

The SVG is meant to sit inline in an HTML page (no namespace, no external
reference); it scales to the page width through its viewBox.
"""

from __future__ import annotations

import re
import textwrap
from collections.abc import Mapping
from typing import Any
from xml.sax.saxutils import escape, quoteattr

# Okabe & Ito (2008, "Color Universal Design") palette entries, chosen to stay
# distinct for protan, deutan and tritan viewers; from memory.
BLUE = "#0b4f8a"  # darkened Okabe-Ito blue: the stock, readable in sunlight
ORANGE = "#E69F00"
VERMILLION = "#D55E00"
INK = "#111111"
PAPER = "#ffffff"
FONT = "DejaVu Sans, Verdana, Arial, sans-serif"

WIDTH, HEIGHT = 360, 266
CAPTION_CHARS = 26  # bold 19 px sans fits about this many characters in 290 px
BAR_X, BAR_Y, BAR_W, BAR_H = 16, 108, 328, 58
# The vague band fades out over the lower half of the scale, the same for every
# group and study: a picture of "low", deliberately not of where the danger is.
VAGUE_REACH = 0.5

DEFAULT_LABELS = {
    "stock": "Stock",
    "stock_of": "of {capacity} {unit}",
    "danger_level": "Danger level {level}",
    "danger_range": "Danger level somewhere in {low} to {high}",
    "danger_vague": "Danger somewhere low",
    # The percent sign travels inside {chance}: a literal "%" in a msgid reads as a
    # printf placeholder to the translation tools.
    "chance": "If crossed: {chance} chance of collapse",
    "health": "Health",
    "calm": "Calm",
    "watch": "Watch",
    "alarm": "Alarm",
    "falling": "falling",
    "steady": "steady",
    "rising": "rising",
}
DANGER_KINDS = ("none", "vague", "range", "exact", "risk", "signal")
BANDS = ("calm", "watch", "alarm")
TRENDS = ("falling", "steady", "rising")


def _number(value: float) -> str:
    """Whole numbers without a decimal point, others to one decimal."""
    value = float(value)
    return str(int(round(value))) if abs(value - round(value)) < 1e-9 else f"{value:.1f}"


def _chance(danger: Mapping) -> str:
    """The flip probability as a percentage, sign included (e.g. "35%")."""
    return f"{_number(100 * float(danger['flip_probability']))}%"


def merge_labels(
    labels: Mapping[str, str] | None, defaults: Mapping[str, str] = DEFAULT_LABELS
) -> dict[str, str]:
    """The caller's (translated) words over the English defaults; unknown keys refused."""
    merged = dict(defaults)
    if labels:
        unknown = sorted(set(labels) - set(defaults))
        if unknown:
            raise ValueError(f"unknown label keys {unknown}; allowed: {sorted(defaults)}")
        merged.update(labels)
    return merged


def _say(labels: dict[str, str], key: str, **values: str) -> str:
    try:
        return labels[key].format(**values)
    except (KeyError, IndexError, ValueError) as exc:
        raise ValueError(
            f"label {key!r} holds {labels[key]!r}; it may use only the fields "
            f"{sorted('{' + v + '}' for v in values)}"
        ) from exc


def _text(x: float, y: float, content: str, *, size: int, anchor: str = "start",
          weight: str = "normal", fill: str = INK, halo: bool = False) -> str:
    # A white halo keeps dark words legible where they cross a pattern.
    halo_attrs = f' stroke="{PAPER}" stroke-width="4" paint-order="stroke"' if halo else ""
    return (
        f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size}" font-weight="{weight}" '
        f'text-anchor="{anchor}" fill="{fill}"{halo_attrs}>{escape(content)}</text>'
    )


def _x(value: float, capacity: float) -> float:
    share = min(max(float(value) / capacity, 0.0), 1.0)
    return BAR_X + share * BAR_W


def _check_view(view: Mapping[str, Any]) -> tuple[float, float, dict[str, Any]]:
    for key in ("stock", "capacity", "danger"):
        if key not in view:
            raise ValueError(f"view lacks {key!r}; pass the dict participant_view returns")
    stock, capacity, danger = view["stock"], view["capacity"], view["danger"]
    if not isinstance(capacity, (int, float)) or isinstance(capacity, bool) or capacity <= 0:
        raise ValueError(f"view['capacity'] holds {capacity!r}; allowed: a positive number")
    if not isinstance(stock, (int, float)) or isinstance(stock, bool) or not 0 <= stock <= capacity:
        raise ValueError(f"view['stock'] holds {stock!r}; allowed: a number from 0 to {capacity}")
    kind = danger.get("kind") if isinstance(danger, Mapping) else None
    if kind not in DANGER_KINDS:
        raise ValueError(f"view['danger']['kind'] holds {kind!r}; allowed: {list(DANGER_KINDS)}")
    needed = {"range": ("low", "high"), "exact": ("level",), "risk": ("level", "flip_probability"),
              "signal": ("band", "trend")}.get(kind, ())
    missing = [k for k in needed if k not in danger]
    if missing:
        raise ValueError(f"view['danger'] of kind {kind!r} lacks {missing}")
    if kind == "signal" and (danger["band"] not in BANDS or danger["trend"] not in TRENDS):
        raise ValueError(
            f"signal band {danger['band']!r} / trend {danger['trend']!r}; "
            f"allowed bands {list(BANDS)}, trends {list(TRENDS)}"
        )
    return float(stock), float(capacity), dict(danger)


def _defs(p: str) -> str:
    """Patterns: a striped hatch (black and white stripes show on both fill and paper)."""
    return (
        "<defs>"
        f'<pattern id="{p}-hatch" width="12" height="12" patternUnits="userSpaceOnUse" '
        'patternTransform="rotate(45)">'
        f'<rect width="12" height="12" fill="{ORANGE}" fill-opacity="0.55"/>'
        f'<rect width="3" height="12" fill="{INK}"/><rect x="3" width="2" height="12" fill="{PAPER}"/>'
        "</pattern>"
        f'<linearGradient id="{p}-fade" x1="0" x2="1" y1="0" y2="0">'
        '<stop offset="0" stop-color="#fff" stop-opacity="1"/>'
        '<stop offset="0.55" stop-color="#fff" stop-opacity="0.8"/>'
        '<stop offset="1" stop-color="#fff" stop-opacity="0"/>'
        "</linearGradient>"
        f'<mask id="{p}-fade-mask" maskContentUnits="userSpaceOnUse">'
        f'<rect x="{BAR_X}" y="{BAR_Y - 6}" width="{BAR_W * VAGUE_REACH:.1f}" height="{BAR_H + 12}" '
        f'fill="url(#{p}-fade)"/></mask>'
        "</defs>"
    )


def _warning_sign(cx: float, top: float, size: float) -> str:
    """A triangle with an exclamation mark: danger without relying on colour."""
    half = size / 2
    return (
        f'<path d="M{cx:.1f},{top:.1f} L{cx + half:.1f},{top + size:.1f} '
        f'L{cx - half:.1f},{top + size:.1f} Z" '
        f'fill="{ORANGE}" stroke="{INK}" stroke-width="2.5" stroke-linejoin="round"/>'
        f'<rect x="{cx - 1.75:.1f}" y="{top + size * 0.32:.1f}" width="3.5" '
        f'height="{size * 0.36:.1f}" fill="{INK}"/>'
        f'<circle cx="{cx:.1f}" cy="{top + size * 0.82:.1f}" r="2.2" fill="{INK}"/>'
    )


def _caption(content: str) -> list[str]:
    """Warning sign and a caption beside it: two lines, or three smaller ones (translations run long)."""
    size, lines = 19, textwrap.wrap(content, width=CAPTION_CHARS) or [""]
    if len(lines) > 2:
        size, lines = 16, textwrap.wrap(content, width=int(CAPTION_CHARS * 19 / 16))
        if len(lines) > 3:  # past three lines the text is cut visibly, never silently
            lines = lines[:2] + [textwrap.shorten(" ".join(lines[2:]), width=int(CAPTION_CHARS * 19 / 16))]
    step = size + 4
    first_baseline = {1: 236, 2: 224, 3: 216}[len(lines)]
    parts = [_warning_sign(30, first_baseline - 22, 30)]
    for i, line in enumerate(lines):
        parts.append(_text(54, first_baseline + step * i, line, size=size, weight="bold"))
    return parts


def _label_anchor(x: float, text: str, size: int) -> tuple[float, str]:
    """Centre a label on x unless it would run off the picture."""
    half = 0.3 * size * len(text)  # rough width of a sans-serif line
    if x - half < 4:
        return 4.0, "start"
    if x + half > WIDTH - 4:
        return WIDTH - 4.0, "end"
    return x, "middle"


def _exact(danger: dict[str, Any], capacity: float, labels: dict[str, str], p: str) -> list[str]:
    level = float(danger["level"])
    x = _x(level, capacity)
    words = _say(labels, "danger_level", level=_number(level))
    lx, anchor = _label_anchor(x, words, 20)
    parts = [
        f'<rect x="{BAR_X}" y="{BAR_Y}" width="{x - BAR_X:.1f}" height="{BAR_H}" fill="url(#{p}-hatch)"/>',
        f'<rect x="{x - 3:.1f}" y="{BAR_Y - 8}" width="6" height="{BAR_H + 16}" fill="{VERMILLION}" '
        f'stroke="{INK}" stroke-width="2"/>',
        _text(lx, BAR_Y - 14, words, size=20, anchor=anchor, weight="bold", halo=True),
    ]
    if danger["kind"] == "risk":
        parts += _caption(_say(labels, "chance", chance=_chance(danger)))
    return parts


def _range(danger: dict[str, Any], capacity: float, labels: dict[str, str], p: str) -> list[str]:
    low, high = float(danger["low"]), float(danger["high"])
    x0, x1 = _x(low, capacity), _x(high, capacity)
    low_text, high_text = _number(low), _number(high)
    # Each end's number sits outside its edge, so the two never overlap; where
    # an edge is too near the end of the bar, one "low – high" label is centred.
    if x0 - BAR_X > 40 and BAR_X + BAR_W - x1 > 40:
        end_labels = [
            _text(x0 - 4, BAR_Y - 10, low_text, size=22, anchor="end", weight="bold", halo=True),
            _text(x1 + 4, BAR_Y - 10, high_text, size=22, anchor="start", weight="bold", halo=True),
        ]
    else:
        both = f"{low_text} \u2013 {high_text}"
        x, anchor = _label_anchor((x0 + x1) / 2, both, 22)
        end_labels = [_text(x, BAR_Y - 10, both, size=22, anchor=anchor, weight="bold", halo=True)]
    dash = f'stroke="{INK}" stroke-width="3" stroke-dasharray="7 4"'
    return [
        f'<rect x="{x0:.1f}" y="{BAR_Y}" width="{x1 - x0:.1f}" height="{BAR_H}" fill="url(#{p}-hatch)"/>',
        f'<line x1="{x0:.1f}" x2="{x0:.1f}" y1="{BAR_Y - 26}" y2="{BAR_Y + BAR_H + 4}" {dash}/>',
        f'<line x1="{x1:.1f}" x2="{x1:.1f}" y1="{BAR_Y - 26}" y2="{BAR_Y + BAR_H + 4}" {dash}/>',
        *end_labels,
        *_caption(_say(labels, "danger_range", low=low_text, high=high_text)),
    ]


def _vague(labels: dict[str, str], p: str) -> list[str]:
    return [
        f'<g mask="url(#{p}-fade-mask)"><rect x="{BAR_X}" y="{BAR_Y - 6}" '
        f'width="{BAR_W * VAGUE_REACH:.1f}" height="{BAR_H + 12}" fill="url(#{p}-hatch)"/></g>',
        *_caption(labels["danger_vague"]),
    ]


def _band_badge(band: str, cx: float, cy: float) -> str:
    """Calm: circle with a tick; watch: triangle with '!'; alarm: octagon with '!!'."""
    if band == "calm":
        return (
            f'<circle cx="{cx}" cy="{cy}" r="19" fill="{BLUE}" stroke="{INK}" stroke-width="2.5"/>'
            f'<path d="M{cx - 9},{cy} l6,7 l12,-14" fill="none" stroke="{PAPER}" stroke-width="5" '
            'stroke-linecap="round" stroke-linejoin="round"/>'
        )
    if band == "watch":
        return _warning_sign(cx, cy - 20, 40)
    points = " ".join(
        f"{cx + dx * 20:.1f},{cy + dy * 20:.1f}"
        for dx, dy in [(-0.41, -1), (0.41, -1), (1, -0.41), (1, 0.41), (0.41, 1), (-0.41, 1),
                       (-1, 0.41), (-1, -0.41)]
    )
    return (
        f'<polygon points="{points}" fill="{VERMILLION}" stroke="{INK}" stroke-width="2.5"/>'
        f'<rect x="{cx - 7.5}" y="{cy - 11}" width="4" height="14" fill="{PAPER}"/>'
        f'<rect x="{cx + 3.5}" y="{cy - 11}" width="4" height="14" fill="{PAPER}"/>'
        f'<circle cx="{cx - 5.5}" cy="{cy + 8}" r="2.4" fill="{PAPER}"/>'
        f'<circle cx="{cx + 5.5}" cy="{cy + 8}" r="2.4" fill="{PAPER}"/>'
    )


def _trend_arrow(trend: str, cx: float, cy: float) -> str:
    """A thick arrow pointing down, right or up (drawn right, then rotated)."""
    angle = {"falling": 90, "steady": 0, "rising": -90}[trend]
    return (
        f'<g transform="translate({cx},{cy}) rotate({angle})">'
        f'<path d="M-16,-6 H2 V-15 L18,0 L2,15 V6 H-16 Z" fill="{INK}"/></g>'
    )


def _fit(text: str, room: float, largest: int, em: float = 0.62) -> int:
    """Font size at which ``text`` fits ``room`` px (rough glyph width ``em``), at most ``largest``."""
    return int(max(14, min(largest, room / (em * max(len(text), 1)))))


def _signal(danger: dict[str, Any], labels: dict[str, str]) -> list[str]:
    band, trend = danger["band"], danger["trend"]
    # Translated words differ in length ("Tranquilo", "en baisse"): shrink them to their room
    # so the band word never runs into the arrow, nor the trend word off the picture.
    return [
        _band_badge(band, 38, 232),
        _text(68, 230, labels["health"], size=15),
        _text(68, 253, labels[band], size=_fit(labels[band], 200 - 68, 26, em=0.66), weight="bold"),
        _trend_arrow(trend, 222, 236),
        _text(246, 245, labels[trend], size=_fit(labels[trend], WIDTH - 4 - 246, 22, em=0.58)),
    ]


def _describe(stock: str, danger: dict[str, Any], labels: dict[str, str], of: str) -> str:
    """Plain sentence for screen readers, built from the same words as the picture."""
    words = [f"{labels['stock']} {stock} {of}."]
    kind = danger["kind"]
    if kind in ("exact", "risk"):
        words.append(_say(labels, "danger_level", level=_number(danger["level"])) + ".")
    if kind == "risk":
        words.append(_say(labels, "chance", chance=_chance(danger)) + ".")
    if kind == "range":
        low, high = _number(danger["low"]), _number(danger["high"])
        words.append(_say(labels, "danger_range", low=low, high=high) + ".")
    if kind == "vague":
        words.append(labels["danger_vague"] + ".")
    if kind == "signal":
        words.append(f"{labels['health']}: {labels[danger['band']]}, {labels[danger['trend']]}.")
    return " ".join(words)


def stock_gauge_svg(
    view: Mapping[str, Any], *, labels: Mapping[str, str] | None = None, id_prefix: str = "gauge"
) -> str:
    """Inline SVG of the stock and, as the treatment allows, the danger (see module doc).

    Parameters
    ----------
    view : a participant view (``participant_view``); reads ``stock``,
        ``capacity``, ``unit`` (optional) and ``danger``.
    labels : translated words by key (``DEFAULT_LABELS`` lists them and their
        ``{fields}``); missing keys fall back to English.
    id_prefix : prefix of the pattern ids, unique per page if it shows several gauges.
    """
    if not re.fullmatch(r"[A-Za-z][A-Za-z0-9_-]{0,30}", id_prefix):
        raise ValueError(f"id_prefix holds {id_prefix!r}; allowed: a letter, then letters, digits, _ or -")
    words = merge_labels(labels)
    stock, capacity, danger = _check_view(view)
    unit = str(view.get("unit", ""))
    stock_text, capacity_text = _number(stock), _number(capacity)
    of = _say(words, "stock_of", capacity=capacity_text, unit=unit).strip()
    title = _describe(stock_text, danger, words, of)
    fill_w = _x(stock, capacity) - BAR_X
    # Shrink "of 2000 bundles of firewood" to fit beside the numeral (rough glyph widths).
    room = WIDTH - 2 * BAR_X - 10 - 0.62 * 50 * len(stock_text)
    of_size = int(max(13, min(22, room / (0.56 * max(len(of), 1)))))
    p = id_prefix

    parts = [
        f'<svg viewBox="0 0 {WIDTH} {HEIGHT}" width="100%" role="img" '
        f'aria-label={quoteattr(title)} font-family={quoteattr(FONT)}>',
        f"<title>{escape(title)}</title>",
        _defs(p),
        f'<rect width="{WIDTH}" height="{HEIGHT}" fill="{PAPER}"/>',
        _text(BAR_X, 24, words["stock"], size=18),
        f'<text x="{BAR_X}" y="70" fill="{INK}"><tspan font-size="50" font-weight="bold">'
        f'{escape(stock_text)}</tspan><tspan font-size="{of_size}" dx="10">{escape(of)}</tspan></text>',
        f'<rect x="{BAR_X}" y="{BAR_Y}" width="{BAR_W}" height="{BAR_H}" fill="{PAPER}"/>',
        f'<rect x="{BAR_X}" y="{BAR_Y}" width="{fill_w:.1f}" height="{BAR_H}" fill="{BLUE}"/>',
    ]
    kind = danger["kind"]
    if kind in ("exact", "risk"):
        parts += _exact(danger, capacity, words, p)
    elif kind == "range":
        parts += _range(danger, capacity, words, p)
    elif kind == "vague":
        parts += _vague(words, p)
    elif kind == "signal":
        parts += _signal(danger, words)
    parts += [
        # Outline and stock edge last, so no danger mark hides them.
        f'<rect x="{BAR_X}" y="{BAR_Y}" width="{BAR_W}" height="{BAR_H}" fill="none" '
        f'stroke="{INK}" stroke-width="3"/>',
        f'<line x1="{BAR_X + fill_w:.1f}" x2="{BAR_X + fill_w:.1f}" y1="{BAR_Y}" y2="{BAR_Y + BAR_H}" '
        f'stroke="{INK}" stroke-width="3"/>',
        _text(BAR_X, BAR_Y + BAR_H + 22, "0", size=18),
        _text(BAR_X + BAR_W, BAR_Y + BAR_H + 22, capacity_text, size=18, anchor="end"),
        "</svg>",
    ]
    return "".join(parts)
