"""An inline SVG chart on each asset page: the worst point's error against time.

As-found errors are dots, as-left errors after an adjustment are open squares
joined to their as-found dot; the fitted drift line restarts from each
adjustment; dashed lines are ± MPE (and ± acceptance limit where the rule
sets it lower). Hand-drawn SVG (a few dozen elements) rather than a plotting
library: it costs nothing per asset, and every value in it is a number or a
date, so nothing from the evidence needs escaping.
"""

from __future__ import annotations

import pandas as pd

from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.hookspecs import hookimpl
from loopledger.plugins import drift

W, H = 560, 230
LEFT, RIGHT, TOP, BOTTOM = 58, 14, 12, 30
DAYS_PER_YEAR = drift.DAYS_PER_YEAR


def chart(points: pd.DataFrame, fit_row: pd.Series | None, end: pd.Timestamp) -> str:
    """The SVG for one asset and input_pct (``points`` from ``drift_points``, in date order)."""
    dates = pd.to_datetime(points["date"])
    start = dates.min()
    end = max(end, dates.max() + pd.Timedelta(days=30))
    mpe = float(points["mpe_pct"].iloc[-1])
    limit = float(points["limit_pct"].iloc[-1])
    values = pd.concat([points["error_pct_span"], points["as_left_pct"]]).abs().max()
    top = max(1.3 * mpe if mpe == mpe else 0.0, 1.15 * float(values if values == values else 0.0), 1e-6)
    span_days = max((end - start).days, 1)

    def px(d: pd.Timestamp) -> float:
        return LEFT + (W - LEFT - RIGHT) * (d - start).days / span_days

    def py(v: float) -> float:
        return TOP + (H - TOP - BOTTOM) * (top - v) / (2 * top)

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {W} {H}" width="{W}" height="{H}" '
           'role="img" class="drift-chart">',
           f'<line x1="{LEFT}" y1="{py(0):.1f}" x2="{W - RIGHT}" y2="{py(0):.1f}" stroke="#999" stroke-width="0.6"/>']
    for value, label, colour in ((mpe, "MPE", "#b22"), (limit, "limit", "#d80")):
        if value != value or (label == "limit" and abs(limit - mpe) < 1e-12):
            continue
        for sign in (1, -1):
            y = py(sign * value)
            out.append(f'<line x1="{LEFT}" y1="{y:.1f}" x2="{W - RIGHT}" y2="{y:.1f}" stroke="{colour}" '
                       'stroke-dasharray="5 4" stroke-width="1"/>')
        out.append(f'<text x="{W - RIGHT - 2}" y="{py(value) - 3:.1f}" font-size="10" text-anchor="end" '
                   f'fill="{colour}">{label} {value:+.3f}</text>')
    for v in (top, 0.0, -top):
        out.append(f'<text x="{LEFT - 4}" y="{py(v) + 3:.1f}" font-size="10" text-anchor="end">{v:+.2f}</text>')
    out.append(f'<text x="12" y="{(H - BOTTOM + TOP) / 2:.0f}" font-size="10" text-anchor="middle" '
               f'transform="rotate(-90 12 {(H - BOTTOM + TOP) / 2:.0f})">error, % of span</text>')
    for year in range(start.year + 1, end.year + 1):
        x = px(pd.Timestamp(year=year, month=1, day=1))
        out.append(f'<line x1="{x:.1f}" y1="{H - BOTTOM}" x2="{x:.1f}" y2="{H - BOTTOM + 4}" stroke="#555"/>'
                   f'<text x="{x:.1f}" y="{H - BOTTOM + 15}" font-size="10" text-anchor="middle">{year}</text>')
    if fit_row is not None and pd.notna(fit_row["slope_pct_per_year"]):
        ref = pd.Timestamp(fit_row["ref_date"])
        slope, intercept = float(fit_row["slope_pct_per_year"]), float(fit_row["intercept_pct"])
        trims = points["trims_pct"].fillna(0.0).to_numpy()
        bounds = [*dates.tolist(), end]
        for i, d0 in enumerate(dates):
            d1 = bounds[i + 1]
            ys = [intercept + slope * (d - ref).days / DAYS_PER_YEAR - trims[i] for d in (d0, d1)]
            out.append(f'<line x1="{px(d0):.1f}" y1="{py(ys[0]):.1f}" x2="{px(d1):.1f}" y2="{py(ys[1]):.1f}" '
                       'stroke="#36c" stroke-width="1.2"/>')
    for d, found, left in zip(dates, points["error_pct_span"], points["as_left_pct"], strict=True):
        if pd.notna(found):
            out.append(f'<circle cx="{px(d):.1f}" cy="{py(found):.1f}" r="3.5" fill="#222"/>')
        if pd.notna(left):
            if pd.notna(found):
                out.append(f'<line x1="{px(d):.1f}" y1="{py(found):.1f}" x2="{px(d):.1f}" y2="{py(left):.1f}" '
                           'stroke="#222" stroke-width="0.8"/>')
            out.append(f'<rect x="{px(d) - 3:.1f}" y="{py(left) - 3:.1f}" width="6" height="6" fill="white" '
                       'stroke="#222"/>')
    out.append("</svg>")
    return "".join(out)


@hookimpl
def ll_asset_sections(ctx: RunContext, asset: str) -> list[Section]:
    per_asset = drift.compute(ctx)
    if asset not in per_asset.index:
        return []
    where = float(per_asset.at[asset, "drift_input_pct"])
    pts = ctx.extras["drift_points"]
    mine = pts[(pts["asset"] == asset) & (pts["input_pct"] == where)].sort_values(["date", "test"])
    if len(mine) < 2:
        return []
    fits = ctx.extras["drift_fits"]
    row = fits[(fits["asset"] == asset) & (fits["input_pct"] == where)]
    fit_row = row.iloc[0] if len(row) else None
    mine = mine.assign(mpe_pct=fit_row["mpe_pct"] if fit_row is not None else float("nan"),
                       limit_pct=fit_row["limit_pct"] if fit_row is not None else float("nan"))
    predicted = pd.to_datetime(per_asset.at[asset, "predicted_out_of_tolerance"])
    end = pd.Timestamp(ctx.as_of)
    if pd.notna(predicted):
        end = max(end, min(predicted + pd.Timedelta(days=60), pd.Timestamp(mine["date"].max()) + pd.DateOffset(years=5)))
    alt = (f"Error at the {where:g} % test point against time: as-found dots, as-left squares, fitted drift "
           "line restarting at each adjustment, dashed ± MPE")
    return [Section(title=f"Drift at the {where:g} % point", kind="svg", html=chart(mine, fit_row, end), alt=alt,
                    order=31)]
