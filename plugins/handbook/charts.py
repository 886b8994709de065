"""The handbook's two charts, written as SVG text (not a plugin itself).

``error_chart``: error in % of output span against input in %, the area outside ±MPE shaded, acceptance
limits as dashed lines when they differ from the MPE, as-found and as-left points with ±U bars.
``drift_chart``: as-found error per test point over the years, the fitted drift line of each point
(restarting after every adjustment), as-left values as hollow marks, ±MPE shading; the years are the
cells between thin dividers, each year's label centred in its cell.

Black and greys only, with a distinct marker shape and dash pattern per series, so they read in print.
The same data and title always give the same bytes. Drawing bits shared by both are in :mod:`svgplot`.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from loopledger.plugins.handbook import svgplot as sp
from loopledger.plugins.handbook.svgplot import BOTTOM, LEFT, RIGHT, TOP, KeyEntry

PHASES = {"as_found": ("As found", sp.MARKERS[0], "#000", "", False),
          "as_left": ("As left", sp.MARKERS[1], "#4a4a4a", "6 3", True)}
ACCEPT_DASH = "5 2"


def _column(points: list[dict[str, Any]], name: str) -> np.ndarray:
    return sp.finite([p.get(name) for p in points])


def error_chart(data: dict[str, Any], title: str) -> str:
    """Error in % of span against input in %, with the ±MPE zone, acceptance limits and U error bars."""
    pts = list(data.get("points") or [])
    x, err, mpe = _column(pts, "input_pct"), _column(pts, "error_pct"), _column(pts, "mpe_pct")
    acc, u = _column(pts, "accept_pct"), np.abs(_column(pts, "U_pct"))
    phase = np.array([str(p.get("phase")) for p in pts], dtype=object)
    u0 = np.where(np.isfinite(u), u, 0.0)
    xa, xticks, xstep = sp.value_axis(np.concatenate([x, [0.0, 100.0]]), LEFT, RIGHT)
    ya, yticks, ystep = sp.value_axis(np.concatenate([err + u0, err - u0, mpe, -mpe, acc, -acc, [0.0]]), BOTTOM, TOP)
    body = [sp.heading(title), sp.tolerance_zone(x, mpe, xa, ya), sp.y_frame(ya, yticks, ystep,
                                                                           "Error (% of output span)")]
    entries: list[KeyEntry] = []
    if np.isfinite(mpe).any():
        entries.append(KeyEntry("outside ±MPE", swatch=True))
    shown_acc = np.isfinite(acc) & ~np.isclose(acc, mpe)
    if shown_acc.any():
        order = np.argsort(x, kind="stable")
        xs, a = xa.px(x[order]), acc[order]
        lines = sp.polyline(xs, ya.px(a)) + sp.polyline(xs, ya.px(-a))
        body.append(sp.path(lines, f'class="accept" stroke="#000" stroke-width="1" fill="none"{sp.dash(ACCEPT_DASH)}'))
        entries.append(KeyEntry("acceptance limit", line=ACCEPT_DASH))
    body.append(sp.zero_line(ya))
    bars = False
    for name, (label, shape, colour, style, hollow) in PHASES.items():
        mine = np.flatnonzero(phase == name)
        if not mine.size:
            continue
        mine = mine[np.argsort(x[mine], kind="stable")]
        px, py = xa.px(x[mine]), ya.px(err[mine])
        has_u = np.isfinite(u[mine]) & np.isfinite(px) & np.isfinite(py)
        if has_u.any():
            bars = True
            lo, hi = ya.px(err[mine] - u[mine]), ya.px(err[mine] + u[mine])
            d = "".join(f"M{a:.1f},{b:.1f}V{c:.1f}m-3,0h6M{a - 3:.1f},{b:.1f}h6"
                        for a, b, c in zip(px[has_u].tolist(), lo[has_u].tolist(), hi[has_u].tolist(), strict=True))
            body.append(sp.path(d, f'stroke="{colour}" stroke-width=".9" fill="none"'))
        body.append(sp.path(sp.polyline(px, py), f'stroke="{colour}" stroke-width="1.1" fill="none"{sp.dash(style)}'))
        body.append(sp.path(sp.marks(px, py, shape), f'class="pt {name}" fill="{"#fff" if hollow else colour}" '
                                                     f'stroke="{colour}" stroke-width="1"'))
        entries.append(KeyEntry(label, colour, shape, hollow, style))
    if bars:
        entries.append(KeyEntry("bars: ±U", bar=True))
    body += [_x_value_frame(xa, xticks, xstep), sp.x_label("Input (% of input range)"), sp.key(entries)]
    return sp.document(title, error_alt(data), body)


def _x_value_frame(axis: sp.Axis, ticks: np.ndarray, step: float) -> str:
    xs = axis.px(ticks).tolist()
    stubs = "".join(f"M{x:.1f},{BOTTOM:.1f}v4" for x in xs)
    labels = "".join(f'<text class="tk xt" x="{x:.1f}" y="{BOTTOM + 15:.1f}" text-anchor="middle">{t}</text>'
                     for x, t in zip(xs, sp.tick_text(ticks, step), strict=True))
    return f'<path class="ax" d="M{LEFT:.1f},{BOTTOM:.1f}H{RIGHT:.1f}{stubs}"/>{labels}'


def _days(values: list[Any]) -> np.ndarray:
    """Dates (ISO text) as float days since 1970-01-01; NaN where missing or not a date."""
    try:
        arr = np.array([None if v is None else str(v)[:10] for v in values], dtype="datetime64[D]")
    except ValueError:
        arr = np.array([_day(v) for v in values], dtype="datetime64[D]")
    out = arr.astype("int64").astype(float)
    out[np.isnat(arr)] = np.nan
    return out


def _day(value: Any) -> np.datetime64:
    try:
        return np.datetime64(str(value)[:10], "D")
    except ValueError:
        return np.datetime64("NaT", "D")


def _year_start(year: int) -> float:
    return float(np.datetime64(f"{year:04d}-01-01", "D").astype("int64"))


def _year_frame(days: np.ndarray) -> tuple[sp.Axis, str]:
    """The date axis over whole calendar years covering ``days``: a divider at each 1 January, the year's
    label centred in its cell (every 1, 2, 5, 10, ... years when there are many)."""
    good = days[np.isfinite(days)]
    if not good.size:
        good = np.array([_year_start(2000)])
    ends = np.array([good.min(), good.max()]).astype("int64").astype("datetime64[D]")
    years = ends.astype("datetime64[Y]").astype("int64") + 1970
    last = int(min(max(years[1], 1), 9998)) + 1
    first = min(int(max(years[0], 1)), last - 1)
    axis = sp.Axis(_year_start(first), _year_start(last), LEFT, RIGHT)
    count = last - first
    every = next(m * 10**e for e in range(5) for m in (1, 2, 5) if count / (m * 10**e) <= 10)
    starts = np.array([_year_start(y) for y in range(first, last + 1)])
    xs = axis.px(starts).tolist()
    cells = range(count) if count <= 40 else range(0, count + 1, every)
    dividers = "".join(f"M{xs[i]:.1f},{TOP:.1f}V{BOTTOM:.1f}" for i in cells if 0 < i < count)
    stubs = "".join(f"M{xs[i]:.1f},{BOTTOM:.1f}v4" for i in cells if 0 <= i <= count)
    labels = "".join(f'<text class="tk xt" x="{(xs[i] + xs[i + 1]) / 2:.1f}" y="{BOTTOM + 15:.1f}" '
                     f'text-anchor="middle">{first + i}</text>' for i in range(count) if (first + i) % every == 0)
    frame = (f'<path class="gd" d="{dividers}"/>' if dividers else "") + \
        f'<path class="ax" d="M{LEFT:.1f},{BOTTOM:.1f}H{RIGHT:.1f}{stubs}"/>{labels}'
    return axis, frame


def _fit_segments(when: np.ndarray, trims: np.ndarray | None, fit: dict[str, Any],
                  end: float) -> list[tuple[float, float, float, float]] | None:
    """The fitted drift line as (day, value, day, value) pieces: with the trims made at adjustments it
    restarts after each test, the last piece running on to ``end`` (the as-of date) when that is later;
    without trims one piece from the reference date (or first test) to the last test."""
    ref = _days([fit.get("ref_date")])[0]
    slope, intercept = sp.finite([fit.get("slope_pct_per_year"), fit.get("intercept_pct")])
    if not (np.isfinite(ref) and np.isfinite(slope)) or not when.size:
        return None
    intercept = intercept if np.isfinite(intercept) else 0.0

    def at(day: float) -> float:
        return float(intercept + slope * (day - ref) / 365.25)

    if trims is not None:
        bounds = [*when.tolist(), max(float(when[-1]), end) if np.isfinite(end) else float(when[-1])]
        return [(a, at(a) - t, b, at(b) - t) for a, b, t in zip(bounds[:-1], bounds[1:], trims.tolist(), strict=True)]
    a, b = min(float(when[0]), float(ref)), float(when[-1])
    return [(a, at(a), b, at(b))]


def drift_chart(data: dict[str, Any], title: str) -> str:
    """As-found error over the years, one series per test point, with fitted drift lines when present."""
    pts = list(data.get("points") or [])
    day, pct, found = _days([p.get("date") for p in pts]), _column(pts, "input_pct"), _column(pts, "error_pct")
    left = _column(pts, "as_left_pct")
    has_trims = any("trims_pct" in p for p in pts)
    trims = np.nan_to_num(_column(pts, "trims_pct"), nan=0.0)
    end = _days([data.get("end")])[0] if data.get("end") else np.nan
    fits = {round(float(f["input_pct"]), 3): f for f in data.get("fits") or [] if f.get("input_pct") is not None}
    mpe = float(sp.finite([data.get("mpe_pct")])[0])
    mpe = abs(mpe) if np.isfinite(mpe) and mpe != 0 else np.nan
    usable = np.isfinite(day) & np.isfinite(pct)
    series = []  # (percent, rows in date order, fit pieces)
    for value in np.unique(pct[usable]).tolist():
        rows = np.flatnonzero(usable & (pct == value))
        rows = rows[np.argsort(day[rows], kind="stable")]
        fit = fits.get(round(value, 3))
        pieces = _fit_segments(day[rows], trims[rows] if has_trims else None, fit, end) if fit else None
        series.append((value, rows, pieces or []))
    segs = np.array([s for _v, _r, pieces in series for s in pieces], dtype=float).reshape(-1, 4)
    xa, years = _year_frame(np.concatenate([day[usable], segs[:, 0], segs[:, 2]]))
    ya, yticks, ystep = sp.value_axis(np.concatenate([found[usable], left[usable], segs[:, 1], segs[:, 3],
                                                      [mpe, -mpe, 0.0]]), BOTTOM, TOP)
    body = [sp.heading(title), sp.tolerance_zone(np.array([xa.lo]), np.array([mpe]), xa, ya),
            sp.y_frame(ya, yticks, ystep, "As-found error (% of output span)"), years, sp.zero_line(ya)]
    entries = [KeyEntry("outside ±MPE", swatch=True)] if np.isfinite(mpe) else []
    any_left = any_line = False
    for i, (value, rows, pieces) in enumerate(series):
        shape, colour = sp.MARKERS[i % len(sp.MARKERS)], sp.GREYS[i % len(sp.GREYS)]
        style = sp.DASHES[(i + i // len(sp.MARKERS)) % len(sp.DASHES)]
        if pieces:
            any_line = True
            p = np.array(pieces, dtype=float)
            x0, y0, x1, y1 = xa.px(p[:, 0]), ya.px(p[:, 1]), xa.px(p[:, 2]), ya.px(p[:, 3])
            d = "".join(f"M{a:.1f},{b:.1f}L{c:.1f},{e:.1f}"
                        for a, b, c, e in zip(x0.tolist(), y0.tolist(), x1.tolist(), y1.tolist(), strict=True))
            body.append(sp.path(d, f'class="fit" stroke="{colour}" stroke-width="1" fill="none"{sp.dash(style)}'))
        px = xa.px(day[rows])
        if np.isfinite(left[rows]).any():
            any_left = True
            body.append(sp.path(sp.marks(px, ya.px(left[rows]), shape),
                                f'class="pt as_left" fill="#fff" stroke="{colour}" stroke-width="1"'))
        body.append(sp.path(sp.marks(px, ya.px(found[rows]), shape),
                            f'class="pt as_found" fill="{colour}" stroke="{colour}" stroke-width="1"'))
        entries.append(KeyEntry(f"{value:g} % input", colour, shape, line=style if pieces else None))
    if any_left:
        entries.append(KeyEntry("as left (hollow)", "#000", sp.MARKERS[0], hollow=True))
    if any_line:
        entries.append(KeyEntry("fitted drift", line=""))
    body += [sp.x_label("Test date"), sp.key(entries)]
    return sp.document(title, drift_alt(data), body)


def error_alt(data: dict[str, Any]) -> str:
    """A text alternative for :func:`error_chart`: the worst point of each phase against its limit."""
    pts = list(data.get("points") or [])
    parts = []
    for phase, (label, *_rest) in PHASES.items():
        mine = [p for p in pts if p.get("phase") == phase]
        if not mine:
            continue
        errors = [abs(e) if math.isfinite(e := sp.number(p.get("error_pct"))) else -1.0 for p in mine]
        if max(errors) < 0:
            parts.append(f"{label}: {len(mine)} points, no error computed.")
            continue
        worst = mine[errors.index(max(errors))]
        mpe = sp.number(worst.get("mpe_pct"))
        limit = f"MPE ±{mpe:.3f} %" if math.isfinite(mpe) else "no MPE"
        parts.append(f"{label}: {len(mine)} points, largest error {sp.number(worst['error_pct']):+.3f} % of span at "
                     f"{sp.number(worst.get('input_pct')):g} % input ({limit}).")
    return "Chart of error against input. " + " ".join(parts)


def drift_alt(data: dict[str, Any]) -> str:
    """A text alternative for :func:`drift_chart`: how many points and tests, and each fitted drift."""
    pts = list(data.get("points") or [])
    dates = sorted({str(p["date"]) for p in pts if p.get("date") is not None})
    count = len({v for v in _column(pts, "input_pct").tolist() if np.isfinite(v)})
    text = (f"Chart of as-found error over time at {count} test points, "
            f"{len(dates)} tests from {dates[0]} to {dates[-1]}." if dates else "Chart of as-found error over time.")
    for f in data.get("fits") or []:
        if f.get("slope_pct_per_year") is not None and f.get("input_pct") is not None:
            text += (f" Fitted drift at {float(f['input_pct']):g} %: "
                     f"{float(f['slope_pct_per_year']):+.3f} % of span a year.")
    return text
