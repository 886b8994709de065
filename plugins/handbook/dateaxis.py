"""The drift chart's date axis (not a plugin): calendar ticks chosen by the span of the dates.

The axis runs over the dates with a margin on each side; its ticks fall on calendar boundaries (days,
the 1st/8th/15th/22nd of a month, month starts, 1 January) at the finest step whose labels fit side by
side, and are labelled with ISO 8601 dates at the precision the step needs: ``2024`` when the ticks are
years apart, ``2024-03`` when months apart, ``2024-03-17`` when days apart, so a reader can tell when each
test was. Dates are float days since 1970-01-01 (NaN where missing).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from loopledger.plugins.handbook import svgplot as sp
from loopledger.plugins.handbook.svgplot import BOTTOM, TOP

#: tick steps tried from the finest: (unit, how many); "D7" and "D14" fall on fixed days of each month
STEPS = [("D", 1), ("D", 2), ("D7", 7), ("D14", 14), ("M", 1), ("M", 2), ("M", 3), ("M", 6),
         *(("Y", n) for n in (1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000))]
MONTH_DAYS = {"D7": (1, 8, 15, 22), "D14": (1, 15)}
MOST_TICKS = 12
DAYS_IN = {"D": 1.0, "M": 30.44, "Y": 365.25}
GAP_PX = 14.0
LABEL_SIZE = 10.0
#: the dates numpy can write as YYYY-MM-DD: 0001-01-01 .. 9999-12-31, as days since 1970-01-01
FIRST_DAY, LAST_DAY = -719162.0, 2932896.0


def days(values: Sequence[object]) -> np.ndarray:
    """Dates (ISO text, or anything whose first ten characters are one) as float days since 1970-01-01;
    NaN where missing or not a date."""
    try:
        arr = np.array([None if v is None else str(v)[:10] for v in values], dtype="datetime64[D]")
    except ValueError:
        arr = np.array([_day(v) for v in values], dtype="datetime64[D]")
    out = arr.astype("int64").astype(float)
    out[np.isnat(arr)] = np.nan
    return out


def _day(value: object) -> np.datetime64:
    try:
        return np.datetime64(str(value)[:10], "D")
    except ValueError:
        return np.datetime64("NaT", "D")


def iso(day: float) -> str:
    """The day (days since 1970-01-01) as YYYY-MM-DD."""
    return str(np.datetime64(int(round(day)), "D"))


def _ticks(lo: float, hi: float, unit: str, n: int) -> np.ndarray:
    """The tick days within ``[lo, hi]`` for one step."""
    if unit == "D":
        return np.arange(np.ceil(lo / n) * n, np.floor(hi) + 1.0, n, dtype=float)
    if unit in MONTH_DAYS:
        first = np.datetime64(int(lo), "D").astype("datetime64[M]").astype("int64")
        last = np.datetime64(int(hi), "D").astype("datetime64[M]").astype("int64")
        months = np.arange(first, last + 1).astype("datetime64[M]").astype("datetime64[D]").astype("int64")
        found = (months[:, None] + np.array(MONTH_DAYS[unit])[None, :] - 1).ravel().astype(float)
        return found[(found >= lo) & (found <= hi)]
    kind = "datetime64[M]" if unit == "M" else "datetime64[Y]"
    first = np.datetime64(int(np.ceil(lo)), "D").astype(kind).astype("int64")
    last = np.datetime64(int(np.floor(hi)), "D").astype(kind).astype("int64")
    start = -(-first // n) * n
    found = np.arange(start, last + 1, n).astype(kind).astype("datetime64[D]").astype("int64").astype(float)
    return found[(found >= lo) & (found <= hi)]


def _label(day: float, unit: str) -> str:
    text = iso(day)
    return text[:4] if unit == "Y" else text[:7] if unit == "M" else text


def date_axis(values: np.ndarray, p0: float, p1: float) -> tuple[sp.Axis, np.ndarray, list[str]]:
    """An axis over the finite ``values`` (days) from pixel ``p0`` to ``p1``: the dates with a margin of
    4 % of their span (at least 10 days) each side; the tick days; their labels."""
    good = values[np.isfinite(values)]
    if not good.size:
        good = np.array([10957.0])  # 2000-01-01
    lo, hi = float(good.min()), float(good.max())
    pad = max((hi - lo) * 0.04, 10.0)
    lo, hi = max(lo - pad, FIRST_DAY), min(hi + pad, LAST_DAY)
    if hi - lo < 20.0:  # dates at the very end of the calendar: keep a span to draw on
        lo, hi = (hi - 20.0, hi) if hi >= LAST_DAY else (lo, lo + 20.0)
    room = abs(p1 - p0)
    ticks, unit = np.array([]), "Y"
    for unit, n in STEPS:
        if (hi - lo) / (n * DAYS_IN[unit[0]]) > 3 * MOST_TICKS:  # far too many: not worth listing
            continue
        ticks = _ticks(lo, hi, unit, n)
        width = sp.text_width(_label(ticks[0], unit), LABEL_SIZE) if ticks.size else 0.0
        if ticks.size <= MOST_TICKS and ticks.size * (width + GAP_PX) <= room:
            break
    return sp.Axis(lo, hi, p0, p1), ticks, [_label(t, unit) for t in ticks.tolist()]


def frame(axis: sp.Axis, ticks: np.ndarray, labels: list[str]) -> str:
    """Thin grid lines at the ticks, the x axis line with its stubs and the date labels below it."""
    xs = axis.px(ticks).tolist()
    grid = "".join(f"M{x:.1f},{TOP:.1f}V{BOTTOM:.1f}" for x in xs)
    stubs = "".join(f"M{x:.1f},{BOTTOM:.1f}v4" for x in xs)
    text = "".join(f'<text class="tk xt" x="{x:.1f}" y="{BOTTOM + 15:.1f}" text-anchor="middle">{t}</text>'
                   for x, t in zip(xs, labels, strict=True))
    return (f'<path class="gd" d="{grid}"/>' if grid else "") + \
        f'<path class="ax" d="M{axis.p0:.1f},{BOTTOM:.1f}H{axis.p1:.1f}{stubs}"/>{text}'
