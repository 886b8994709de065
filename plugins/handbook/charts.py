"""The handbook's two charts, written as SVG text (not a plugin itself).

``error_chart``: error in % of output span against input in %, the area outside ±MPE shaded, acceptance
limits as dashed lines when they differ from the MPE, as-found and as-left points with ±U bars. On a
square-root (DP flow) device the x axis is % of flow, the quantity the trade reads, with % of ΔP along the
top.
``drift_chart``: as-found error per test point over time on a dated axis (:mod:`dateaxis`), the fitted
drift line of each point (restarting at the as-left error after every test that recorded one), as-left
values as hollow marks, ±MPE shading.

The error chart is black and greys; the drift chart gives each test point its own colour, marker shape
and dash pattern, so no series is told apart by colour alone and both read in print. The same data and
title always give the same bytes. Drawing bits shared by both are in :mod:`svgplot`.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from loopledger.plugins.handbook import dateaxis
from loopledger.plugins.handbook import svgplot as sp
from loopledger.plugins.handbook.svgplot import BOTTOM, LEFT, RIGHT, TOP, KeyEntry

PHASES = {"as_found": ("As found", sp.MARKERS[0], "#000", "", False),
          "as_left": ("As left", sp.MARKERS[1], "#4a4a4a", "6 3", True)}
ACCEPT_DASH = "5 2"
#: the history stage's word for a fit whose slope does not differ from zero at its significance
NO_TREND = "no significant trend"


def _column(points: list[dict[str, Any]], name: str) -> np.ndarray:
    return sp.finite([p.get(name) for p in points])


def flow_pct(dp_pct: np.ndarray) -> np.ndarray:
    """% of flow for % of ΔP on a square-root device: 100·√(ΔP % / 100), since flow through an orifice plate
    or venturi goes as the root of its pressure drop (Q ∝ √ΔP, common practice). A ΔP below zero is put as
    far left of zero as its root (−√|ΔP|), so such a point is still drawn, apart from the one at zero."""
    return np.sign(dp_pct) * 100.0 * np.sqrt(np.abs(dp_pct) / 100.0)


def dp_pct(flow: np.ndarray) -> np.ndarray:
    """The inverse of :func:`flow_pct`: % of ΔP for % of flow."""
    return np.sign(flow) * flow * flow / 100.0


def is_sqrt(points: list[dict[str, Any]]) -> bool:
    """Whether the points are of a square-root (DP flow) device, as its assets.csv row says."""
    return any(p.get("characteristic") == "sqrt" for p in points)


def error_chart(data: dict[str, Any], title: str) -> str:
    """Error in % of span against input in %, with the ±MPE zone, acceptance limits and U error bars; on a
    square-root device against % of flow, with % of ΔP along the top."""
    pts = list(data.get("points") or [])
    sqrt = is_sqrt(pts)
    x, err, mpe = _column(pts, "input_pct"), _column(pts, "error_pct"), _column(pts, "mpe_pct")
    x = flow_pct(x) if sqrt else x
    acc, u = _column(pts, "accept_pct"), np.abs(_column(pts, "U_pct"))
    phase = np.array([str(p.get("phase")) for p in pts], dtype=object)
    u0 = np.minimum(np.where(np.isfinite(u), u, 0.0), u_room(mpe, acc))
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
    bars = clipped = False
    for name, (label, shape, colour, style, hollow) in PHASES.items():
        mine = np.flatnonzero(phase == name)
        if not mine.size:
            continue
        mine = mine[np.argsort(x[mine], kind="stable")]
        px, py = xa.px(x[mine]), ya.px(err[mine])
        has_u = np.isfinite(u[mine]) & np.isfinite(px) & np.isfinite(py)
        if has_u.any():
            bars = True
            d, cut = _u_bars(px[has_u], err[mine][has_u], u[mine][has_u], ya)
            clipped = clipped or cut
            body.append(sp.path(d, f'class="ubar" stroke="{colour}" stroke-width=".9" fill="none"'))
        body.append(sp.path(sp.polyline(px, py), f'stroke="{colour}" stroke-width="1.1" fill="none"{sp.dash(style)}'))
        body.append(sp.path(sp.marks(px, py, shape), f'class="pt {name}" fill="{"#fff" if hollow else colour}" '
                                                     f'stroke="{colour}" stroke-width="1"'))
        entries.append(KeyEntry(label, colour, shape, hollow, style))
    if bars:
        entries.append(KeyEntry("bars: ±U", bar=True))
    if clipped:
        entries.append(KeyEntry("arrow: U runs on"))
    body += [_x_value_frame(xa, xticks, xstep), sp.key(entries)]
    body += [_dp_frame(xa), sp.x_label("Flow (% of flow range)")] if sqrt else [sp.x_label("Input (% of input range)")]
    return sp.document(title, error_alt(data), body)


def u_room(mpe: np.ndarray, acc: np.ndarray) -> float:
    """How far a ±U bar is drawn from its point: three times the widest limit (MPE or acceptance) of the
    chart, so that a U far beyond the tolerance (a square root near zero ΔP, a rig with a TUR well under
    1) cannot squash the ±MPE zone flat; unbounded when no limit is known."""
    limits = np.abs(np.concatenate([mpe, acc]))
    limits = limits[np.isfinite(limits) & (limits > 0)]
    return 3.0 * float(limits.max()) if limits.size else math.inf


def _u_bars(px: np.ndarray, err: np.ndarray, u: np.ndarray, ya: sp.Axis) -> tuple[str, bool]:
    """Path data of ±U bars at pixels ``px``: a cap at each end inside the plot, an arrowhead where a bar
    runs past its edge (cut there); and whether any was cut."""
    lo, hi = ya.px(err - u), ya.px(err + u)  # pixels: lo below (larger), hi above
    out, cut = [], False
    for x, a, b in zip(px.tolist(), lo.tolist(), hi.tolist(), strict=True):
        a_cut, b_cut = a > BOTTOM, b < TOP
        a, b = min(a, BOTTOM), max(b, TOP)
        cut = cut or a_cut or b_cut
        out.append(f"M{x:.1f},{a:.1f}V{b:.1f}")
        out.append(f"M{x - 3:.1f},{b + 4:.1f}L{x:.1f},{b:.1f}L{x + 3:.1f},{b + 4:.1f}" if b_cut
                   else f"M{x - 3:.1f},{b:.1f}h6")
        out.append(f"M{x - 3:.1f},{a - 4:.1f}L{x:.1f},{a:.1f}L{x + 3:.1f},{a - 4:.1f}" if a_cut
                   else f"M{x - 3:.1f},{a:.1f}h6")
    return "".join(out), cut


def _x_value_frame(axis: sp.Axis, ticks: np.ndarray, step: float) -> str:
    xs = axis.px(ticks).tolist()
    stubs = "".join(f"M{x:.1f},{BOTTOM:.1f}v4" for x in xs)
    labels = "".join(f'<text class="tk xt" x="{x:.1f}" y="{BOTTOM + 15:.1f}" text-anchor="middle">{t}</text>'
                     for x, t in zip(xs, sp.tick_text(ticks, step), strict=True))
    return f'<path class="ax" d="M{LEFT:.1f},{BOTTOM:.1f}H{RIGHT:.1f}{stubs}"/>{labels}'


def _dp_frame(axis: sp.Axis) -> str:
    """The secondary axis along the top of a square-root device's chart: % of ΔP at the places its roots
    put them on the flow axis below (1-2-5 ticks, and a tenth and a half of their step, where the root
    spreads the low end out), each label kept only where it does not touch one already placed."""
    lo, hi = dp_pct(np.array([axis.lo, axis.hi]))
    main, step = sp.nice_ticks(float(lo), float(hi), most=12)
    labels = dict(zip(main.tolist(), sp.tick_text(main, step), strict=True))
    for v in (step / 10, step / 2, -step / 10, -step / 2):
        labels.setdefault(v, f"{v:g}")
    kept: list[tuple[float, float, str]] = []  # (pixel, half width, label)
    for value, text in labels.items():
        x = float(axis.px(flow_pct(np.array([value])))[0])
        half = sp.text_width(text, 10) / 2
        if LEFT - 0.5 <= x <= RIGHT + 0.5 and all(abs(x - k) >= half + h + 6 for k, h, _t in kept):
            kept.append((x, half, text))
    kept.sort()
    stubs = "".join(f"M{x:.1f},{TOP:.1f}v-4" for x, _h, _t in kept)
    text = "".join(f'<text class="tk xt-dp" x="{x:.1f}" y="{TOP - 7:.1f}" text-anchor="middle">{t}</text>'
                   for x, _h, t in kept)
    return (f'<path class="ax" d="M{LEFT:.1f},{TOP:.1f}H{RIGHT:.1f}{stubs}"/>{text}'
            f'<text class="al dpl" x="{RIGHT + 8:.1f}" y="{TOP - 7:.1f}">ΔP (% of input range)</text>')


def _fit_segments(when: np.ndarray, left: np.ndarray, trims: np.ndarray | None, fit: dict[str, Any],
                  end: float) -> list[tuple[float, float, float, float]] | None:
    """The fitted drift line as (day, value, day, value) pieces, one from each test on or after the fit's
    reference date to the next (the last running on to ``end``, the as-of date, when that is later).

    Between two tests a point drifts from where it was left (the drift model of the history stage), so a
    piece after a test with an as-left error starts at that as-left error; a piece after a test that left
    the point as found goes on from where the piece before it ended; the first piece starts on the fitted
    line (less the trims made before it). Each piece runs at the fitted rate. Without trims (no drift
    stage) one piece from the reference date (or first test) to the last test."""
    ref = dateaxis.days([fit.get("ref_date")])[0]
    slope, intercept = sp.finite([fit.get("slope_pct_per_year"), fit.get("intercept_pct")])
    if not (np.isfinite(ref) and np.isfinite(slope)) or not when.size:
        return None
    intercept = intercept if np.isfinite(intercept) else 0.0

    def at(day: float) -> float:
        return float(intercept + slope * (day - ref) / 365.25)

    if trims is None:
        a, b = min(float(when[0]), float(ref)), float(when[-1])
        return [(a, at(a), b, at(b))]
    mine = np.flatnonzero(when >= ref)
    if not mine.size:
        return None
    last = float(when[-1])
    bounds = [*when[mine].tolist(), max(last, end) if np.isfinite(end) else last]
    pieces: list[tuple[float, float, float, float]] = []
    for i, (a, b) in zip(mine.tolist(), zip(bounds[:-1], bounds[1:], strict=True), strict=True):
        if np.isfinite(left[i]):
            start = float(left[i])
        elif pieces:
            start = pieces[-1][3]
        else:
            start = at(a) - float(trims[i])
        pieces.append((a, start, b, start + float(slope) * (b - a) / 365.25))
    return [p for p in pieces if p[2] > p[0]] or pieces[-1:]


Series = tuple[float, np.ndarray, list[tuple[float, float, float, float]], bool]


def _series(data: dict[str, Any]) -> tuple[list[Series], dict[str, np.ndarray]]:
    """Each test point's rows (in date order), fitted pieces and whether its fit is a trend at the history
    stage's significance (True when the fit says nothing of it), and the columns the rows index."""
    pts = list(data.get("points") or [])
    cols = {"day": dateaxis.days([p.get("date") for p in pts]), "pct": _column(pts, "input_pct"),
            "found": _column(pts, "error_pct"), "left": _column(pts, "as_left_pct")}
    has_trims = any("trims_pct" in p for p in pts)
    trims = np.nan_to_num(_column(pts, "trims_pct"), nan=0.0)
    end = dateaxis.days([data.get("end")])[0] if data.get("end") else np.nan
    fits = {round(float(f["input_pct"]), 3): f for f in data.get("fits") or [] if f.get("input_pct") is not None}
    usable = np.isfinite(cols["day"]) & np.isfinite(cols["pct"])
    cols["usable"] = usable
    series = []
    for value in np.unique(cols["pct"][usable]).tolist():
        rows = np.flatnonzero(usable & (cols["pct"] == value))
        rows = rows[np.argsort(cols["day"][rows], kind="stable")]
        fit = fits.get(round(value, 3))
        pieces = _fit_segments(cols["day"][rows], cols["left"][rows], trims[rows] if has_trims else None, fit,
                               end) if fit else None
        series.append((value, rows, pieces or [], not fit or fit.get("status") != NO_TREND))
    return series, cols


def drift_chart(data: dict[str, Any], title: str) -> str:
    """As-found error over time, one series per test point (its own colour, marker shape and line dash),
    as-left errors hollow, with the fitted drift lines when present, against a dated axis."""
    series, c = _series(data)
    usable, day, found, left = c["usable"], c["day"], c["found"], c["left"]
    segs = np.array([s for _v, _r, pieces, _t in series for s in pieces], dtype=float).reshape(-1, 4)
    xa, xticks, xlabels = dateaxis.date_axis(np.concatenate([day[usable], segs[:, 0], segs[:, 2]]), LEFT, RIGHT)
    mpe = float(sp.finite([data.get("mpe_pct")])[0])
    mpe = abs(mpe) if np.isfinite(mpe) and mpe != 0 else np.nan
    ya, yticks, ystep = sp.value_axis(np.concatenate([found[usable], left[usable], segs[:, 1], segs[:, 3],
                                                      [mpe, -mpe, 0.0]]), BOTTOM, TOP)
    body = [sp.heading(title), sp.tolerance_zone(np.array([xa.lo]), np.array([mpe]), xa, ya),
            sp.y_frame(ya, yticks, ystep, "As-found error (% of output span)"),
            dateaxis.frame(xa, xticks, xlabels), sp.zero_line(ya)]
    entries = [KeyEntry("outside ±MPE", swatch=True)] if np.isfinite(mpe) else []
    any_left = any_line = any_weak = False
    for i, (value, rows, pieces, trend) in enumerate(series):
        shape, colour, style = sp.series_style(i)
        if pieces:
            any_line = True
            p = np.array(pieces, dtype=float)
            x0, y0, x1, y1 = xa.px(p[:, 0]), ya.px(p[:, 1]), xa.px(p[:, 2]), ya.px(p[:, 3])
            d = "".join(f"M{a:.1f},{b:.1f}L{c:.1f},{e:.1f}"
                        for a, b, c, e in zip(x0.tolist(), y0.tolist(), x1.tolist(), y1.tolist(), strict=True))
            any_weak = any_weak or not trend
            body.append(sp.path(d, f'class="fit s{i}" stroke="{colour}" stroke-width="{1.2 if trend else 0.7}" '
                                   f'fill="none"{sp.dash(style)}'))
        px = xa.px(day[rows])
        if np.isfinite(left[rows]).any():
            any_left = True
            body.append(sp.path(sp.marks(px, ya.px(left[rows]), shape),
                                f'class="pt as_left s{i}" fill="#fff" stroke="{colour}" stroke-width="1.2"'))
        body.append(sp.path(sp.marks(px, ya.px(found[rows]), shape),
                            f'class="pt as_found s{i}" fill="{colour}" stroke="#fff" stroke-width="1.6" '
                            f'paint-order="stroke"'))
        entries.append(KeyEntry(f"{value:g} % input", colour, shape, line=style if pieces else None))
    if any_left:
        entries.append(KeyEntry("as left (hollow)", "#000", sp.MARKERS[0], hollow=True))
    if any_line:
        entries.append(KeyEntry("lines: fitted drift"))
    if any_weak:
        entries.append(KeyEntry("thin: no sig. trend"))
    body += [sp.x_label("Test date"), sp.key(entries)]
    return sp.document(title, drift_alt(data), body)


def error_alt(data: dict[str, Any]) -> str:
    """A text alternative for :func:`error_chart`: the worst point of each phase against its limit."""
    pts = list(data.get("points") or [])
    sqrt = is_sqrt(pts)
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
        dp = sp.number(worst.get("input_pct"))
        where = f"{float(flow_pct(np.array([dp]))[0]):.3g} % flow ({dp:g} % ΔP)" if sqrt else f"{dp:g} % input"
        parts.append(f"{label}: {len(mine)} points, largest error {sp.number(worst['error_pct']):+.3f} % of span at "
                     f"{where} ({limit}).")
    u, room = np.abs(_column(pts, "U_pct")), u_room(_column(pts, "mpe_pct"), _column(pts, "accept_pct"))
    beyond = np.flatnonzero(np.isfinite(u) & (u > room))
    if beyond.size:
        big = int(beyond[np.argmax(u[beyond])])
        parts.append(f"The ±U bars of {beyond.size} point{'s' if beyond.size != 1 else ''} run beyond the chart "
                     f"(an arrowhead where cut; the largest U is ±{u[big]:.3g} % of span).")
    head = ("Chart of error against flow, square-root device (% of flow = 100·√(% of ΔP / 100)). " if sqrt
            else "Chart of error against input. ")
    return head + " ".join(parts)


def drift_alt(data: dict[str, Any]) -> str:
    """A text alternative for :func:`drift_chart`: the test points and tests, the dates of the tests, those
    with as-left errors and those where a fitted line restarts at one, and each fitted drift."""
    series, c = _series(data)
    day, left = c["day"], c["left"]
    dates = sorted({dateaxis.iso(d) for d in day.tolist() if np.isfinite(d)})
    if not dates:
        return "Chart of as-found error over time."
    count = len(series)
    text = (f"Chart of as-found error over time at {count} test point{'s' if count != 1 else ''}, tested on "
            f"{len(dates)} date{'s' if len(dates) != 1 else ''} from {dates[0]} to {dates[-1]}")
    text += f" ({', '.join(dates)})." if 1 < len(dates) <= 12 else "."
    lefts = {dateaxis.iso(d) for d, v in zip(day.tolist(), left.tolist(), strict=True)
             if np.isfinite(d) and np.isfinite(v)}
    restarts = {dateaxis.iso(day[r]) for _v, rows, pieces, _t in series for r in rows.tolist()
                if np.isfinite(left[r]) and day[r] in {p[0] for p in pieces}}
    if lefts:
        text += f" As-left errors (hollow marks) on {', '.join(sorted(lefts))}."
    if restarts:
        text += f" The fitted lines restart at the as-left errors of {', '.join(sorted(restarts))}."
    for f in data.get("fits") or []:
        if f.get("slope_pct_per_year") is not None and f.get("input_pct") is not None:
            weak = " (no significant trend)" if f.get("status") == NO_TREND else ""
            text += (f" Fitted drift at {float(f['input_pct']):g} %: "
                     f"{float(f['slope_pct_per_year']):+.3f} % of span a year{weak}.")
    return text
