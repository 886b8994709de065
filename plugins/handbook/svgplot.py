"""Small drawing bits for the handbook's SVG charts (not a plugin): escaping, nice ticks, the
data-to-pixel map, marker shapes and the frame every chart shares.

SVG is written as text, following the SVG 1.1 structure (``<svg>`` with ``viewBox``, ``<title>``,
``<desc>``, ``<path>``, ``<text>``). Numbers are written with a fixed number of decimals, so the same
data always gives the same bytes.
"""

from __future__ import annotations

import html
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

WIDTH, HEIGHT = 960, 340
#: the plot area inside the canvas: left, top, right, bottom (pixels); the key sits right of it
LEFT, TOP, RIGHT, BOTTOM = 66.0, 34.0, 806.0, 292.0
KEY_X = 818.0
#: values are clamped to this size before drawing, so a wild reading cannot overflow the arithmetic
LARGEST = 1e12

#: every rule scoped to the chart's own class: a chart is drawn inline into a page, where a bare ``text``
#: or ``.out`` rule would reach the page's own elements
STYLE = (
    ".llc text{font-family:'DejaVu Sans',Arial,sans-serif;font-size:10.5px;fill:#1a1a1a}"
    ".llc .hd{font-size:12px;font-weight:bold}.llc .al{font-size:10.5px;fill:#333}.llc .tk{font-size:10px;fill:#333}"
    ".llc .ky{font-size:10px}.llc .ax{stroke:#1a1a1a;stroke-width:1;fill:none}.llc .gd{stroke:#c4c4c4;"
    "stroke-width:.6;stroke-dasharray:1 2;fill:none}.llc .zero{stroke:#1a1a1a;stroke-width:.9;fill:none}"
    ".llc .out{fill:#ececec}.llc .in{fill:#fff}.llc .edge{stroke:#8a8a8a;stroke-width:.8;fill:none}"
)

_BAD_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def esc(text: object) -> str:
    """Text made safe for SVG/XML content and attributes: ``& < > " '`` escaped, characters XML 1.0
    forbids (control characters, lone surrogates) dropped."""
    return html.escape(_BAD_XML.sub("", str(text)), quote=True)


def finite(values: Sequence[object]) -> np.ndarray:
    """A float array of ``values``: None, infinities and text that is not a number become NaN; the rest
    is clamped to ±LARGEST."""
    try:
        arr = np.array(values, dtype=float)
    except (TypeError, ValueError):
        arr = np.array([number(v) for v in values], dtype=float)
    arr[~np.isfinite(arr)] = np.nan
    return np.clip(arr, -LARGEST, LARGEST)


def number(value: object) -> float:
    """``value`` as a finite float, or NaN."""
    try:
        found = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return math.nan
    return found if math.isfinite(found) else math.nan


def span_of(values: np.ndarray) -> tuple[float, float]:
    """The low and high finite value, widened around the value when they are (nearly) equal; (-1, 1) when
    nothing is finite."""
    good = values[np.isfinite(values)]
    if not good.size:
        return -1.0, 1.0
    lo, hi = float(good.min()), float(good.max())
    if hi - lo <= 1e-9 * max(abs(lo), abs(hi)) or hi - lo < 1e-9:
        pad = max(abs(lo) * 0.05, 0.05)
        lo, hi = lo - pad, hi + pad
    return lo, hi


def nice_ticks(lo: float, hi: float, most: int = 7) -> tuple[np.ndarray, float]:
    """Tick values covering ``[lo, hi]`` at a step of 1, 2 or 5 x 10^n (the 1-2-5 rule, common practice),
    at most ``most`` + 1 steps; returns the ticks and the step. ``lo < hi`` and both finite."""
    raw = (hi - lo) / most
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1.0, 2.0, 5.0, 10.0) if m * power >= raw * (1 - 1e-12))
    first, last = math.floor(lo / step + 1e-9), math.ceil(hi / step - 1e-9)
    return np.arange(first, last + 1, dtype=float) * step, step


def tick_text(values: np.ndarray, step: float) -> list[str]:
    """Labels for ticks ``step`` apart: fixed decimals enough to tell them apart, or significant digits
    for very large or very small values; never ``-0``."""
    biggest = float(np.abs(values).max()) if values.size else 0.0
    if 1e-4 <= step and biggest < 1e6:
        decimals = max(0, -math.floor(math.log10(step) + 1e-9))
        labels = [f"{v:.{decimals}f}" for v in values.tolist()]
    else:
        digits = max(1, math.ceil(math.log10(max(biggest, step) / step) + 1e-9) + 1)
        labels = [f"{v:.{digits}g}" for v in values.tolist()]
    return ["0" if float(t) == 0 else t for t in labels]


@dataclass(frozen=True)
class Axis:
    """A linear map from data values ``lo..hi`` to pixels ``p0..p1`` (``p0 > p1`` for a y axis)."""

    lo: float
    hi: float
    p0: float
    p1: float

    def px(self, values: np.ndarray) -> np.ndarray:
        return self.p0 + (values - self.lo) * ((self.p1 - self.p0) / (self.hi - self.lo))


def value_axis(values: np.ndarray, p0: float, p1: float, most: int = 7) -> tuple[Axis, np.ndarray, float]:
    """An axis over the finite ``values``: nice ticks covering them, and the axis running 4 % of the tick
    range beyond the outer ticks so no mark sits on the frame. Returns the axis, the ticks and the step."""
    ticks, step = nice_ticks(*span_of(values), most=most)
    margin = (ticks[-1] - ticks[0]) * 0.04
    return Axis(float(ticks[0] - margin), float(ticks[-1] + margin), p0, p1), ticks, step


# marker shapes as relative path data around the point (about 8 px across), for "M x,y" + shape
MARKERS = [
    "m-3.6,0a3.6,3.6 0 1,0 7.2,0a3.6,3.6 0 1,0 -7.2,0z",  # disc
    "m-3.2,-3.2h6.4v6.4h-6.4z",  # square
    "m0,-4.4l4,6.9h-8z",  # triangle, point up
    "m0,-4.6l4.3,4.6l-4.3,4.6l-4.3,-4.6z",  # diamond
    "m0,4.4l4,-6.9h-8z",  # triangle, point down
    "m-1.3,-4.3h2.6v3h3v2.6h-3v3h-2.6v-3h-3v-2.6h3z",  # plus
    "m-4,-2.2l1.8,-1.8l2.2,2.2l2.2,-2.2l1.8,1.8l-2.2,2.2l2.2,2.2l-1.8,1.8l-2.2,-2.2l-2.2,2.2l-1.8,-1.8l2.2,-2.2z",
    "m-2,-3.6h4l2.1,3.6l-2.1,3.6h-4l-2.1,-3.6z",  # hexagon
]
DASHES = ["", "6 3", "2 2", "8 3 2 3"]
GREYS = ["#000", "#3d3d3d", "#5e5e5e", "#262626"]
#: the drift chart's series: a colour, a marker shape and a dash pattern each, so that no series is told
#: apart by its colour alone (in print or to a reader who does not see the colours, the shape and the dash
#: still differ); dark colours of differing lightness, which stay apart when printed in greys
SERIES_COLOURS = ["#1b1b1b", "#1f5c99", "#a34d00", "#2e7d4f", "#7a3b8f", "#6b5a1e", "#b0305a", "#3f6f7a"]
SERIES_DASHES = ["", "7 3", "2 2", "9 3 2 3", "4 2 1 2 1 2", "12 4", "1 3", "6 2 6 5"]


def series_style(i: int) -> tuple[str, str, str]:
    """Series ``i``'s marker shape, colour and dash pattern: every combination differs from the series
    before it in all three until all are used (8 shapes, 8 colours, 8 dashes; then the dash steps on so
    series 8 on do not repeat the first eight's combinations)."""
    n = len(MARKERS)
    return MARKERS[i % n], SERIES_COLOURS[i % n], SERIES_DASHES[(i + i // n) % len(SERIES_DASHES)]


def marks(xs: np.ndarray, ys: np.ndarray, shape: str) -> str:
    """Path data with ``shape`` drawn at every finite (x, y)."""
    ok = np.isfinite(xs) & np.isfinite(ys)
    return "".join(f"M{x:.1f},{y:.1f}{shape}" for x, y in zip(xs[ok].tolist(), ys[ok].tolist(), strict=True))


def polyline(xs: np.ndarray, ys: np.ndarray) -> str:
    """Path data joining the finite (x, y) in order (a missing point is stepped over)."""
    ok = np.isfinite(xs) & np.isfinite(ys)
    pairs = [f"{x:.1f},{y:.1f}" for x, y in zip(xs[ok].tolist(), ys[ok].tolist(), strict=True)]
    return "M" + "L".join(pairs) if len(pairs) > 1 else ""


def path(d: str, attrs: str) -> str:
    return f'<path d="{d}" {attrs}/>' if d else ""


def dash(style: str) -> str:
    return f' stroke-dasharray="{style}"' if style else ""


def text_width(text: str, size: float) -> float:
    """A rough width of ``text`` in a sans-serif face (0.58 em a character)."""
    return len(text) * size * 0.58


def document(title: str, desc: str, body: Sequence[str]) -> str:
    """The whole SVG element: scalable ``viewBox``, ``role="img"`` named by its ``<title>`` and described by
    its ``<desc>`` (no ``id``: several charts are drawn inline into one page)."""
    head = (f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" class="llc" width="{WIDTH}" height="{HEIGHT}" '
            f'viewBox="0 0 {WIDTH} {HEIGHT}" role="img"><title>{esc(title)}</title><desc>{esc(desc)}</desc>'
            f"<style>{STYLE}</style>"
            f'<rect width="{WIDTH}" height="{HEIGHT}" fill="#fff"/>')
    return head + "".join(body) + "</svg>\n"


def heading(title: str) -> str:
    """The chart's heading, squeezed to the canvas width when it is long."""
    room = WIDTH - 2 * 8.0
    fit = f' textLength="{room:.0f}" lengthAdjust="spacingAndGlyphs"' if text_width(title, 12) > room else ""
    return f'<text class="hd" x="8" y="14"{fit}>{esc(title)}</text>'


def y_frame(axis: Axis, ticks: np.ndarray, step: float, label: str) -> str:
    """Dotted grid lines and labels at the y ticks, the left axis line and the y axis label."""
    ys = axis.px(ticks).tolist()
    grid = "".join(f"M{LEFT:.1f},{y:.1f}H{RIGHT:.1f}" for y in ys)
    stubs = "".join(f"M{LEFT - 4:.1f},{y:.1f}h4" for y in ys)
    labels = "".join(f'<text class="tk yt" x="{LEFT - 7:.1f}" y="{y:.1f}" dy=".35em" text-anchor="end">{t}</text>'
                     for y, t in zip(ys, tick_text(ticks, step), strict=True))
    mid = (TOP + BOTTOM) / 2
    return (f'<path class="gd" d="{grid}"/><path class="ax" d="{stubs}M{LEFT:.1f},{TOP:.1f}V{BOTTOM:.1f}"/>'
            f'{labels}<text class="al" transform="translate(14,{mid:.1f}) rotate(-90)" '
            f'text-anchor="middle">{esc(label)}</text>')


def x_label(label: str) -> str:
    middle = (LEFT + RIGHT) / 2
    return f'<text class="al" x="{middle:.1f}" y="{BOTTOM + 33:.1f}" text-anchor="middle">{esc(label)}</text>'


def zero_line(axis: Axis) -> str:
    y = float(axis.px(np.array([0.0]))[0])
    return f'<path class="zero" d="M{LEFT:.1f},{y:.1f}H{RIGHT:.1f}"/>' if TOP <= y <= BOTTOM else ""


def tolerance_zone(xs: np.ndarray, limit: np.ndarray, xa: Axis, ya: Axis) -> str:
    """The plot area shaded outside ±``limit`` (one value per x, NaN where unknown) and white inside it,
    held level beyond the first and last known x; nothing when no limit is known."""
    ok = np.isfinite(xs) & np.isfinite(limit)
    if not ok.any():
        return ""
    order = np.argsort(xs[ok], kind="stable")
    px, lim = xa.px(xs[ok][order]), np.abs(limit[ok][order])
    px = np.concatenate([[LEFT], px, [RIGHT]])
    lim = np.concatenate([lim[:1], lim, lim[-1:]])
    top, bottom = np.clip(ya.px(lim), TOP, BOTTOM), np.clip(ya.px(-lim), TOP, BOTTOM)
    upper = "L".join(f"{x:.1f},{y:.1f}" for x, y in zip(px.tolist(), top.tolist(), strict=True))
    lower = "L".join(f"{x:.1f},{y:.1f}" for x, y in zip(px[::-1].tolist(), bottom[::-1].tolist(), strict=True))
    return (f'<rect class="out" x="{LEFT:.1f}" y="{TOP:.1f}" width="{RIGHT - LEFT:.1f}" height="{BOTTOM - TOP:.1f}"/>'
            f'<path class="in" d="M{upper}L{lower}Z"/>'
            f'<path class="edge" d="M{upper}M{lower}"/>')


@dataclass(frozen=True)
class KeyEntry:
    """One line of the key: its words and how its sample is drawn (``marker`` shape, hollow or filled,
    line dash; ``swatch`` for a shaded-area sample; ``bar`` for an error-bar sample; none of them: words
    only)."""

    label: str
    colour: str = "#000"
    marker: str = ""
    hollow: bool = False
    line: str | None = None  # dash pattern ("" = solid); None = no line
    swatch: bool = False
    bar: bool = False


def key(entries: Sequence[KeyEntry]) -> str:
    """The key right of the plot area, one entry a line; entries that do not fit are counted instead."""
    room = int((BOTTOM - TOP - 10) // 16)
    shown = list(entries) if len(entries) <= room else list(entries[: room - 1])
    out = []
    for i, e in enumerate(shown):
        y = TOP + 8 + i * 16
        if e.swatch:
            out.append(f'<rect class="out" x="{KEY_X:.1f}" y="{y - 5:.1f}" width="22" height="10" '
                       f'stroke="#8a8a8a" stroke-width=".8"/>')
        if e.line is not None:
            out.append(f'<path d="M{KEY_X:.1f},{y:.1f}h22" stroke="{e.colour}" stroke-width="1.2" fill="none"'
                       f"{dash(e.line)}/>")
        if e.bar:
            out.append(f'<path d="M{KEY_X + 11:.1f},{y - 5:.1f}v10m-3,-10h6m-6,10h6" stroke="{e.colour}" '
                       f'stroke-width=".9" fill="none"/>')
        if e.marker:
            fill = "#fff" if e.hollow else e.colour
            out.append(f'<path d="M{KEY_X + 11:.1f},{y:.1f}{e.marker}" fill="{fill}" stroke="{e.colour}"/>')
        out.append(f'<text class="ky" x="{KEY_X + 28:.1f}" y="{y + 3.5:.1f}">{esc(e.label)}</text>')
    if len(shown) < len(entries):
        y = TOP + 8 + len(shown) * 16
        out.append(f'<text class="ky" x="{KEY_X + 28:.1f}" y="{y + 3.5:.1f}">'
                   f"and {len(entries) - len(shown)} more</text>")
    return f'<g class="key">{"".join(out)}</g>'
