"""An inline SVG chart on each asset page: the worst point's error against time.

As-found errors are dots, as-left errors after an adjustment are open squares
joined to their as-found dot; the fitted drift line restarts from each
adjustment; dashed lines are ± MPE (and ± acceptance limit where the rule
sets it lower). Hand-drawn SVG (a few dozen elements) rather than a plotting
library: it costs nothing per asset, and every value in it is a number or a
date, so nothing from the evidence needs escaping.
"""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.hookspecs import hookimpl
from loopledger.plugins import drift, history

W, H = 560, 230
LEFT, RIGHT, TOP, BOTTOM = 58, 14, 12, 30
DAYS_PER_YEAR = drift.DAYS_PER_YEAR


def _day(value: str) -> dt.date:
    return dt.date.fromisoformat(str(value)[:10])


def _isnum(value: Any) -> bool:
    return isinstance(value, int | float) and not math.isnan(value)


def chart(points: list[dict[str, Any]], fit_row: dict[str, Any] | None, end: dt.date, mpe: float,
          limit: float) -> str:
    """The SVG for one asset and test point: ``points`` from ``drift_points`` in date order, ``fit_row``
    from ``drift_fits`` (None: no line), ``end`` the last day on the time axis."""
    dates = [_day(p["date"]) for p in points]
    start = dates[0]
    end = max(end, dates[-1] + dt.timedelta(days=30))
    values = [abs(v) for p in points for v in (p["error_pct_span"], p["as_left_pct"]) if _isnum(v)]
    top = max(1.3 * mpe if _isnum(mpe) else 0.0, 1.15 * max(values, default=0.0), 1e-6)
    span_days = max((end - start).days, 1)

    def px(d: dt.date) -> float:
        return LEFT + (W - LEFT - RIGHT) * (d - start).days / span_days

    def py(v: float) -> float:
        return TOP + (H - TOP - BOTTOM) * (top - v) / (2 * top)

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {W} {H}" width="{W}" height="{H}" '
           'role="img" class="drift-chart">',
           f'<line x1="{LEFT}" y1="{py(0):.1f}" x2="{W - RIGHT}" y2="{py(0):.1f}" stroke="#999" stroke-width="0.6"/>']
    for value, label, colour in ((mpe, "MPE", "#b22"), (limit, "limit", "#d80")):
        if not _isnum(value) or (label == "limit" and abs(limit - mpe) < 1e-12):
            continue
        for sign in (1, -1):
            y = py(sign * value)
            out.append(f'<line x1="{LEFT}" y1="{y:.1f}" x2="{W - RIGHT}" y2="{y:.1f}" stroke="{colour}" '
                       'stroke-dasharray="5 4" stroke-width="1"/>')
        out.append(f'<text x="{W - RIGHT - 2}" y="{py(value) - 3:.1f}" font-size="10" text-anchor="end" '
                   f'fill="{colour}">{label} {value:+.3f}</text>')
    for v in (top, 0.0, -top):
        out.append(f'<text x="{LEFT - 4}" y="{py(v) + 3:.1f}" font-size="10" text-anchor="end">{v:+.2f}</text>')
    middle = (H - BOTTOM + TOP) / 2
    out.append(f'<text x="12" y="{middle:.0f}" font-size="10" text-anchor="middle" '
               f'transform="rotate(-90 12 {middle:.0f})">error, % of span</text>')
    for year in range(start.year + 1, end.year + 1):
        x = px(dt.date(year, 1, 1))
        out.append(f'<line x1="{x:.1f}" y1="{H - BOTTOM}" x2="{x:.1f}" y2="{H - BOTTOM + 4}" stroke="#555"/>'
                   f'<text x="{x:.1f}" y="{H - BOTTOM + 15}" font-size="10" text-anchor="middle">{year}</text>')
    if fit_row is not None and _isnum(fit_row["slope_pct_per_year"]):
        ref = _day(fit_row["ref_date"])
        slope, intercept = float(fit_row["slope_pct_per_year"]), float(fit_row["intercept_pct"])
        bounds = [*dates, end]
        for i, p in enumerate(points):
            trims = float(p["trims_pct"]) if _isnum(p["trims_pct"]) else 0.0
            d0, d1 = bounds[i], bounds[i + 1]
            y0, y1 = (intercept + slope * (d - ref).days / DAYS_PER_YEAR - trims for d in (d0, d1))
            out.append(f'<line x1="{px(d0):.1f}" y1="{py(y0):.1f}" x2="{px(d1):.1f}" y2="{py(y1):.1f}" '
                       'stroke="#36c" stroke-width="1.2"/>')
    for d, p in zip(dates, points, strict=True):
        found, left = p["error_pct_span"], p["as_left_pct"]
        if _isnum(found):
            out.append(f'<circle cx="{px(d):.1f}" cy="{py(found):.1f}" r="3.5" fill="#222"/>')
        if _isnum(left):
            if _isnum(found):
                out.append(f'<line x1="{px(d):.1f}" y1="{py(found):.1f}" x2="{px(d):.1f}" y2="{py(left):.1f}" '
                           'stroke="#222" stroke-width="0.8"/>')
            out.append(f'<rect x="{px(d) - 3:.1f}" y="{py(left) - 3:.1f}" width="6" height="6" fill="white" '
                       'stroke="#222"/>')
    out.append("</svg>")
    return "".join(out)


@hookimpl
def ll_asset_sections(ctx: RunContext, asset: str) -> list[Section]:
    per_asset = history.records_of(ctx, "drift_assets", asset) if drift.compute(ctx) is not None else []
    if not per_asset:
        return []
    where = per_asset[0]["drift_input_pct"]
    mine = sorted((r for r in history.records_of(ctx, "drift_points", asset) if r["input_pct"] == where),
                  key=lambda r: (str(r["date"]), str(r["test"])))
    if len(mine) < 2:
        return []
    found = [r for r in history.records_of(ctx, "drift_fits", asset) if r["input_pct"] == where]
    fit_row = found[0] if found else None
    nan = float("nan")
    end = ctx.as_of
    predicted = per_asset[0]["predicted_out_of_tolerance"]
    if isinstance(predicted, str) and predicted:
        end = max(end, min(_day(predicted) + dt.timedelta(days=60), _day(mine[-1]["date"]) + dt.timedelta(days=1826)))
    alt = (f"Error at the {where:g} % test point against time: as-found dots, as-left squares, fitted drift "
           "line restarting at each adjustment, dashed ± MPE")
    svg = chart(mine, fit_row, end, fit_row["mpe_pct"] if fit_row else nan, fit_row["limit_pct"] if fit_row else nan)
    return [Section(title=f"Drift at the {where:g} % point", kind="svg", html=svg, alt=alt, order=31)]
