"""The debrief picture: one block's stock path against its revealed threshold, as inline SVG.

Pure, like ``server.gauge``: a function of one block of ``GroupDebrief.to_dict()``
(plus the rounds that ended degraded), so tests need no app. The same visual
language as the gauge: white ground, near-black text, the stock in dark blue, the
danger level in vermillion (Okabe-Ito), and every mark also carries a line style,
a pattern or a word, never colour alone:

- the stock path: thick solid blue line with round dots;
- what-if paths: thinner black lines, long dashes (1 less) and dots (2 less),
  each named at its end;
- danger level: thick vermillion dashed line, named with its number;
- recovery level: blue dotted line, named with its number;
- degraded rounds: hatched columns; the crossing round: a triangle and words.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any
from xml.sax.saxutils import escape, quoteattr

from .gauge import BLUE, FONT, INK, ORANGE, PAPER, VERMILLION, merge_labels
from .numbers import number_text


@dataclass(frozen=True)
class Layout:
    """Picture size and plot area (SVG units); the right margin holds the line names."""

    width: int
    height: int
    left: int
    right_margin: int
    top: int
    bottom: int
    text: float  # font-size multiplier

    @property
    def right_edge(self) -> int:
        return self.width - self.right_margin


# The projector and the handout; a phone gets fewer units per text pixel, so larger words.
WIDE = Layout(640, 330, 52, 150, 24, 282, 1.0)
PHONE = Layout(400, 300, 40, 92, 26, 246, 1.25)
NAMES_INSIDE_BELOW = 120  # a narrower right margin cannot hold "Danger level 37.9": name lines in the plot
WHAT_IF_DASHES = {1: "12 6", 2: "3 5"}

DEFAULT_LABELS = {
    "stock": "Stock",
    "round": "Round",
    "danger_level": "Danger level {level}",
    "recovery_level": "Recovery {level}",
    "crossed": "Crossed in round {round}",
    "degraded": "Degraded",
    "less": "{k} less each",
    "title": "Stock path of part {block}",
}


def _number(value: float) -> str:
    """Whole numbers without a decimal sign, others to one decimal, in the caller's language."""
    return number_text(value)


def _plain_text(x: float, y: float, content: str, *, size: int = 15, anchor: str = "start",
          weight: str = "normal", fill: str = INK) -> str:
    return (
        f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size}" font-weight="{weight}" '
        f'text-anchor="{anchor}" fill="{fill}" stroke="{PAPER}" stroke-width="3" '
        f'paint-order="stroke">{escape(content)}</text>'
    )


# Advance widths of DejaVu Sans (the first font asked for, and the one the laptop has), in em,
# rounded up so that an estimate is never narrower than the drawn word: no label leaves the
# picture or runs into a line because it was measured short (tests measure with FreeType).
EM_NORMAL, EM_BOLD, EM_WIDE = 0.64, 0.72, 0.9
WIDE_LETTERS = frozenset("MWmw@%")


def text_width(content: str, size: float, weight: str = "normal") -> float:
    """Estimated drawn width of ``content`` at ``size`` (DejaVu Sans, see above)."""
    em = EM_BOLD if weight == "bold" else EM_NORMAL
    return size * sum(EM_WIDE if ch in WIDE_LETTERS else em for ch in content)


def _fitted_size(content: str, size: int, room: float, weight: str) -> int:
    """The largest size up to ``size`` at which ``content`` fits in ``room`` (never below 9)."""
    while size > 9 and text_width(content, size, weight) > room:
        size -= 1
    return size


def _wrap(content: str, size: int, room: float, weight: str, most: int) -> list[str]:
    """Words onto at most ``most`` lines of ``room`` width at ``size``, greedily; the last takes the rest."""
    lines: list[str] = []
    for word in content.split():
        if lines and len(lines) < most and text_width(lines[-1] + " " + word, size, weight) > room:
            lines.append(word)
        elif lines and (len(lines) == most or text_width(lines[-1] + " " + word, size, weight) <= room):
            lines[-1] += " " + word
        else:
            lines.append(word)
    return lines or [content]


def _box(x: float, y: float, width: float, size: float, anchor: str) -> tuple[float, float, float, float]:
    left = {"start": x, "middle": x - width / 2, "end": x - width}[anchor]
    return left, y - 0.95 * size, left + width, y + 0.3 * size  # accents above, descenders below


Box = tuple[float, float, float, float]


def _hits(box: Box, lines: list[list[tuple[float, float]]], pad: float = 3.5) -> int:
    """How many of the polylines pass through ``box`` (grown by ``pad`` for the stroke width)."""
    x0, y0, x1, y1 = box[0] - pad, box[1] - pad, box[2] + pad, box[3] + pad
    count = 0
    for line in lines:
        for (ax, ay), (bx, by) in zip(line, line[1:], strict=False):
            steps = max(2, int(max(abs(bx - ax), abs(by - ay)) / 2))
            if any(x0 <= ax + (bx - ax) * i / steps <= x1 and y0 <= ay + (by - ay) * i / steps <= y1
                   for i in range(steps + 1)):
                count += 1
                break
    return count


def _spread(wanted: list[tuple[float, int]], gap: float, bottom: float,
            extra: dict[int, float] | None = None) -> dict[int, float]:
    """Move line-end names apart vertically so no two overlap (keeps their order);
    ``extra`` is the height a name takes below its first line (a second line)."""
    placed: dict[int, float] = {}
    last = -1e9
    for y, key in sorted(wanted):
        y = max(y, last + gap)
        placed[key] = y
        last = y + (extra or {}).get(key, 0.0)
    overflow = last - (bottom + 4)
    if overflow > 0:
        placed = {k: v - overflow for k, v in placed.items()}
    return placed


def stock_path_svg(
    block: Mapping[str, Any],
    capacity: float,
    degraded_rounds: Sequence[int] = (),
    *,
    labels: Mapping[str, str] | None = None,
    id_prefix: str = "path",
    layout: Layout = WIDE,
) -> str:
    """Inline SVG of one debriefed block (a ``blocks`` entry of ``GroupDebrief.to_dict()``).

    Parameters
    ----------
    block : reads ``stock_path``, ``threshold``, ``recovery_level``, ``crossed_round``,
        ``block`` (0-based) and ``what_ifs`` (each ``less_by`` and ``stock_path``).
    capacity : top of the stock scale, in units.
    degraded_rounds : rounds (1-based) that ended in the degraded regime; shaded.
    labels : translated words by key (``DEFAULT_LABELS``); missing keys stay English.
    id_prefix : prefix of pattern ids, unique per page.
    layout : ``WIDE`` (projector, handout) or ``PHONE``.
    """
    if not re.fullmatch(r"[A-Za-z][A-Za-z0-9_-]{0,30}", id_prefix):
        raise ValueError(f"id_prefix holds {id_prefix!r}; allowed: a letter, then letters, digits, _ or -")
    if capacity <= 0:
        raise ValueError(f"capacity holds {capacity!r}; allowed: a positive number")
    words = merge_labels(labels, DEFAULT_LABELS)
    path = [float(v) for v in block["stock_path"]]
    if len(path) < 2:
        raise ValueError("stock_path needs at least two stocks: the start and the stock after round 1")
    what_ifs = list(block.get("what_ifs") or [])
    steps = max([len(path)] + [len(w["stock_path"]) for w in what_ifs]) - 1
    p = id_prefix
    WIDTH, HEIGHT, LEFT, TOP, BOTTOM = (  # noqa: N806 - the drawing's fixed geometry
        layout.width, layout.height, layout.left, layout.top, layout.bottom)
    RIGHT_EDGE = layout.right_edge  # noqa: N806

    def x(i: float) -> float:
        return LEFT + (RIGHT_EDGE - LEFT) * i / steps

    def y(v: float) -> float:
        return BOTTOM - (BOTTOM - TOP) * min(max(v, 0.0), capacity) / capacity

    def _text(x_: float, y_: float, content: str, *, size: int = 15, **kw) -> str:
        return _plain_text(x_, y_, content, size=round(size * layout.text), **kw)

    # Labels inside the plot are placed last, measured, at the first of their candidate places
    # that stays in the picture and crosses no line (else the one crossing fewest).
    lines: list[list[tuple[float, float]]] = []
    inside: list[tuple[str, int, str, list[tuple[float, float, str]]]] = []

    def beside(line_y: float, below: float, above: float, above_first: bool = False):
        """Places along a level's line: right, left, middle; next to it first, then a line further."""
        step = 18 * layout.text
        ys = [line_y + below, line_y - above, line_y + below + step, line_y - above - step]
        if above_first:
            ys = [ys[1], ys[0], ys[3], ys[2]]
        # Where the stock path leaves no room near the line: anywhere in the plot, nearest first.
        rows = [TOP + step * (k + 1) for k in range(int((BOTTOM - TOP) / step))]
        ys += sorted(rows, key=lambda r: abs(r - line_y))
        xs = [(RIGHT_EDGE - 4, "end"), (LEFT + 6, "start"), ((LEFT + RIGHT_EDGE) / 2, "middle")]
        return [(x_, y_, anchor) for y_ in ys for x_, anchor in xs]

    def place_inside() -> list[str]:
        drawn = []
        for content, size, weight, candidates in inside:
            largest = _fitted_size(content, round(size * layout.text), RIGHT_EDGE - LEFT - 8, weight)
            best = None
            # A size smaller by up to a fifth before a place that crosses a line.
            for size in range(largest, max(9, int(largest * 0.8)) - 1, -1):
                width = text_width(content, size, weight)
                for x_, y_, anchor in candidates:
                    box = _box(x_, y_, width, size, anchor)
                    if box[0] < 2 or box[2] > WIDTH - 2 or box[1] < 2 or box[3] > HEIGHT - 2:
                        continue
                    score = _hits(box, lines)
                    if best is None or score < best[0]:
                        best = (score, x_, y_, anchor, box, size)
                    if score == 0:
                        break
                if best is not None and best[0] == 0:
                    break
            if best is None:  # nowhere inside the picture: start at the plot's left edge
                best = (0, LEFT + 4, candidates[0][1], "start", None, largest)
            _, x_, y_, anchor, box, size = best
            if box is not None:
                lines.append([(box[0], box[1]), (box[2], box[1]), (box[2], box[3]), (box[0], box[3])])
            drawn.append(_plain_text(x_, y_, content, size=size, anchor=anchor, weight=weight))
        return drawn

    threshold, recovery = block.get("threshold"), block.get("recovery_level")
    title = words["title"].format(block=int(block.get("block", 0)) + 1)
    parts = [
        f'<svg viewBox="0 0 {WIDTH} {HEIGHT}" width="100%" role="img" aria-label={quoteattr(title)} '
        f'font-family={quoteattr(FONT)}>',
        f"<title>{escape(title)}</title>",
        f'<defs><pattern id="{p}-hatch" width="10" height="10" patternUnits="userSpaceOnUse" '
        f'patternTransform="rotate(45)"><rect width="10" height="10" fill="{ORANGE}" fill-opacity="0.35"/>'
        f'<rect width="2" height="10" fill="{INK}" fill-opacity="0.55"/></pattern></defs>',
        f'<rect width="{WIDTH}" height="{HEIGHT}" fill="{PAPER}"/>',
    ]
    # Degraded rounds: round t runs from point t-1 to point t.
    for t in degraded_rounds:
        if 1 <= t <= steps:
            parts.append(f'<rect x="{x(t - 1):.1f}" y="{TOP}" width="{x(t) - x(t - 1):.1f}" '
                         f'height="{BOTTOM - TOP}" fill="url(#{p}-hatch)"/>')
    degraded_label = None
    if degraded_rounds:
        first = min(degraded_rounds)
        dx = x(first - 1) + 4
        degraded_label = (words["degraded"], 14, "bold", [
            (dx, TOP + 16 * layout.text, "start"), (dx, BOTTOM - 6, "start"),
            (RIGHT_EDGE - 4, TOP + 16 * layout.text, "end"), (RIGHT_EDGE - 4, BOTTOM - 6, "end"),
            *beside(TOP, 16 * layout.text, 0)[3:]])
    # Axes and scale.
    parts += [
        f'<line x1="{LEFT}" x2="{LEFT}" y1="{TOP}" y2="{BOTTOM}" stroke="{INK}" stroke-width="2"/>',
        f'<line x1="{LEFT}" x2="{RIGHT_EDGE}" y1="{BOTTOM}" y2="{BOTTOM}" stroke="{INK}" stroke-width="2"/>',
        _text(LEFT - 6, y(0) + 5, "0", size=14, anchor="end"),
        _text(LEFT - 6, y(capacity) + 5, _number(capacity), size=14, anchor="end"),
        _text(LEFT - 6, TOP - 8, words["stock"], size=14, anchor="start"),
        _text((LEFT + RIGHT_EDGE) / 2, HEIGHT - 6, words["round"], size=14, anchor="middle"),
    ]
    label_every = 1 if steps <= 15 else 5
    for t in range(1, steps + 1):
        if t % label_every == 0 or t == 1:
            parts.append(_text((x(t - 1) + x(t)) / 2, BOTTOM + 18 * layout.text, str(t), size=13,
                               anchor="middle"))
    names: list[tuple[float, int]] = []
    name_text: dict[int, tuple[str, str]] = {}
    # Threshold and recovery level.
    if threshold is not None:
        ty = y(float(threshold))
        parts.append(f'<line x1="{LEFT}" x2="{RIGHT_EDGE}" y1="{ty:.1f}" y2="{ty:.1f}" '
                     f'stroke="{VERMILLION}" stroke-width="5" stroke-dasharray="16 6"/>')
        lines.append([(LEFT, ty), (RIGHT_EDGE, ty)])
        danger_name = words["danger_level"].format(level=_number(threshold))
        if layout.right_margin < NAMES_INSIDE_BELOW:
            inside.append((danger_name, 15, "bold", beside(ty, 22 * layout.text, 8)))
        else:
            names.append((ty + 5, 0))
            name_text[0] = (danger_name, "bold")
    if recovery is not None:
        ry = y(float(recovery))
        parts.append(f'<line x1="{LEFT}" x2="{RIGHT_EDGE}" y1="{ry:.1f}" y2="{ry:.1f}" '
                     f'stroke="{BLUE}" stroke-width="2.5" stroke-dasharray="2 5" stroke-linecap="round"/>')
        lines.append([(LEFT, ry), (RIGHT_EDGE, ry)])
        recovery_name = words["recovery_level"].format(level=_number(recovery))
        if layout.right_margin < NAMES_INSIDE_BELOW:
            inside.append((recovery_name, 14, "normal", beside(ry, 20 * layout.text, 6, above_first=True)))
        else:
            names.append((ry + 5, 1))
            name_text[1] = (recovery_name, "normal")
    # What-if paths under the real one.
    for n, what_if in enumerate(what_ifs, start=2):
        wp = [float(v) for v in what_if["stock_path"]]
        k = int(what_if["less_by"])
        points = " ".join(f"{x(i):.1f},{y(v):.1f}" for i, v in enumerate(wp))
        lines.append([(x(i), y(v)) for i, v in enumerate(wp)])
        parts.append(f'<polyline points="{points}" fill="none" stroke="{INK}" stroke-width="2.5" '
                     f'stroke-dasharray="{WHAT_IF_DASHES.get(k, "8 4")}"/>')
        names.append((y(wp[-1]) + 5, n))
        name_text[n] = (words["less"].format(k=k), "normal")
    # The real path, with dots at every round's start.
    points = " ".join(f"{x(i):.1f},{y(v):.1f}" for i, v in enumerate(path))
    lines.append([(x(i), y(v)) for i, v in enumerate(path)])
    parts.append(f'<polyline points="{points}" fill="none" stroke="{BLUE}" stroke-width="5" '
                 'stroke-linejoin="round"/>')
    parts += [f'<circle cx="{x(i):.1f}" cy="{y(v):.1f}" r="4.5" fill="{BLUE}" stroke="{INK}" '
              'stroke-width="1.5"/>' for i, v in enumerate(path)]
    names.append((y(path[-1]) + 5, 99))
    name_text[99] = (words["stock"], "bold")
    crossed = block.get("crossed_round")
    if crossed:
        cx = (x(crossed - 1) + x(crossed)) / 2
        parts.append(f'<path d="M{cx - 9:.1f},{TOP + 22} h18 l-9,14 z" fill="{VERMILLION}" '
                     f'stroke="{INK}" stroke-width="2"/>')
        label = words["crossed"].format(round=crossed)
        lines.append([(cx - 9, TOP + 22), (cx + 9, TOP + 22), (cx, TOP + 36)])  # the mark itself
        low = BOTTOM - 6
        inside.append((label, 15, "bold", [
            (cx + 14, TOP + 34, "start"), (cx - 14, TOP + 34, "end"), (cx + 14, low, "start"),
            (cx - 14, low, "end"), (LEFT + 6, TOP + 34, "start"), (RIGHT_EDGE - 4, TOP + 34, "end"),
            (LEFT + 6, low, "start"), (RIGHT_EDGE - 4, low, "end")]))
    if degraded_label is not None:
        inside.append(degraded_label)
    parts += place_inside()
    # Names in the right margin: on two lines where one would be small, then shrunk until they fit.
    room, name_size = WIDTH - (RIGHT_EDGE + 8) - 4, round(14 * layout.text)
    drawn_names: dict[int, tuple[list[str], int]] = {}
    for key, (content, weight) in name_text.items():
        wrapped = _wrap(content, name_size, room, weight, most=3)
        drawn_names[key] = (wrapped, min(_fitted_size(line, name_size, room, weight) for line in wrapped))
    line_gap = 16 * layout.text
    extra = {k: line_gap * (len(v[0]) - 1) for k, v in drawn_names.items()}
    for key, ny in _spread(names, 17 * layout.text, BOTTOM, extra).items():
        lines_of_name, size = drawn_names[key]
        weight = name_text[key][1]
        for i, line in enumerate(lines_of_name):
            parts.append(_plain_text(RIGHT_EDGE + 8, ny + i * line_gap, line, size=size, weight=weight))
    parts.append("</svg>")
    return "".join(parts)
