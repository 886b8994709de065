"""Drift: per asset and test point, the as-found error against time, reset at each adjustment.

Model. Between two tests a point drifts from where it was left: the as-left
error if the earlier test adjusted it, else its as-found error. So
``drift_pct = as_found − baseline_pct`` with ``baseline_pct`` the previous
test's left state. To fit one rate across adjustments the as-found errors are
put on one continuous axis: each adjustment's step (as-found − as-left) is added
back to every later as-found error (``continuous_pct``), which is the error the
device would show had it never been trimmed. A least-squares line through
(years since the first test, continuous_pct) gives the rate in % of span per
year, its standard error, and the fitted error now: fitted − the sum of every
trim so far.

A fit needs ``[drift] min_tests`` (default 3) as-found results at distinct dates;
fewer and the point says "too few tests" — two points always lie on a line, and
a line through them is no evidence of a trend. A predicted date is given only
when the slope differs from zero at ``[drift] significance`` (two-sided t test
on n − 2 degrees of freedom, default 0.05). A test with an as-left but no
as-found at a point breaks the chain: only the results after the break are used.

Leaves ``ctx.stash[keys.DRIFT_POINTS]``, ``["drift_fits"]`` and ``["drift_assets"]``
(one row per asset: the worst point's rate and predicted dates).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.cells import cells, grouped
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.plugins.history import history

DAYS_PER_YEAR = 365.25
DEFAULTS: dict[str, Any] = {"min_tests": 3, "significance": 0.05, "horizon_years": 100.0}
KEYS = ["asset", "input_pct"]
FIT_COLUMNS = ["asset", "input_pct", "n", "slope_pct_per_year", "stderr", "intercept_pct", "ref_date", "p_value",
               "status", "fitted_now_pct", "mpe_pct", "limit_pct", "predicted_out_of_tolerance",
               "predicted_acceptance_limit"]
POINT_COLUMNS = ["asset", "input_pct", "test", "date", "error_pct_span", "as_left_pct", "baseline_pct", "drift_pct",
                 "continuous_pct", "trims_pct", "mpe_pct", "limit_pct", "in_fit"]
ASSET_COLUMNS = ["asset", "drift_input_pct", "drift_pct_span_per_year", "drift_stderr", "drift_n", "drift_status",
                 "predicted_out_of_tolerance", "predicted_acceptance_limit"]


def settings(ctx: RunContext) -> dict[str, Any]:
    return {**DEFAULTS, **ctx.section("drift")}


def drift_points(hist: pd.DataFrame) -> pd.DataFrame:
    """One row per (asset, input_pct, test) with an as-found error, on the continuous axis."""
    if hist.empty:
        return pd.DataFrame(columns=POINT_COLUMNS)
    h = hist.sort_values([*KEYS, "date", "test"], kind="stable").reset_index(drop=True)
    found = h["as_found_pct"]
    left_state = h["as_left_pct"].fillna(found)
    baseline = left_state.groupby([h["asset"], h["input_pct"]], sort=False).shift(1)
    trim = (found - h["as_left_pct"]).fillna(0.0)
    trims_before = trim.groupby([h["asset"], h["input_pct"]], sort=False).cumsum() - trim
    # a missing as-found breaks the chain: keep only the run after the last break
    breaks = found.isna().astype(int).groupby([h["asset"], h["input_pct"]], sort=False).cumsum()
    last_run = breaks == breaks.groupby([h["asset"], h["input_pct"]], sort=False).transform("max")
    out = pd.DataFrame({
        "asset": h["asset"], "input_pct": h["input_pct"], "test": h["test"], "date": h["date"],
        "error_pct_span": found, "as_left_pct": h["as_left_pct"], "baseline_pct": baseline,
        "drift_pct": found - baseline, "continuous_pct": found + trims_before, "trims_pct": trims_before + trim,
        "mpe_pct": h["mpe_pct"], "limit_pct": h["limit_pct"], "in_fit": last_run & found.notna(),
    })
    return out


def fit(points: pd.DataFrame, min_tests: int = 3, significance: float = 0.05,
        horizon_years: float = 100.0) -> pd.DataFrame:
    """Least-squares line per (asset, input_pct), vectorised over all groups at once."""
    from scipy.special import stdtr  # Student t CDF; scipy.stats costs seconds to import

    use = points[points["in_fit"].astype(bool)].copy()
    if use.empty:
        return pd.DataFrame(columns=FIT_COLUMNS)
    dates = pd.to_datetime(use["date"], format="%Y-%m-%d")
    grp = use.groupby(KEYS, sort=False)
    ref = dates.groupby([use["asset"], use["input_pct"]], sort=False).transform("min")
    x = (dates - ref).dt.days / DAYS_PER_YEAR
    y = use["continuous_pct"]
    keys = [use["asset"], use["input_pct"]]
    dx = x - x.groupby(keys, sort=False).transform("mean")
    dy = y - y.groupby(keys, sort=False).transform("mean")
    sums = pd.DataFrame({"n": 1, "x": x, "y": y, "sxx": dx * dx, "sxy": dx * dy, "syy": dy * dy,
                         "days": x.groupby(keys, sort=False).transform("nunique")})
    s = sums.groupby(keys, sort=False).agg(n=("n", "sum"), xm=("x", "mean"), ym=("y", "mean"), sxx=("sxx", "sum"),
                                            sxy=("sxy", "sum"), syy=("syy", "sum"), distinct=("days", "max"),
                                            x_last=("x", "max"))
    last = grp.tail(1).set_index(KEYS)
    s["ref_date"] = dates.groupby(keys, sort=False).min()
    ok = (s["distinct"] >= max(int(min_tests), 3)) & (s["sxx"] > 0)
    slope = (s["sxy"] / s["sxx"]).where(ok)
    dof = s["n"] - 2
    ssr = (s["syy"] - slope * s["sxy"]).clip(lower=0.0)
    stderr = np.sqrt(ssr / dof.where(dof > 0) / s["sxx"]).where(ok)
    tstat = slope / stderr
    p_value = pd.Series(2.0 * stdtr(dof.where(ok), -np.abs(tstat)), index=s.index)
    p_value = p_value.where(stderr > 0, np.where(slope.abs() > 0, 0.0, 1.0)).where(ok)
    out = pd.DataFrame({"n": s["n"].astype(int), "slope_pct_per_year": slope, "stderr": stderr,
                        "intercept_pct": (s["ym"] - slope * s["xm"]), "ref_date": s["ref_date"].dt.strftime("%Y-%m-%d"),
                        "p_value": p_value}, index=s.index)
    trims = last["trims_pct"].reindex(s.index)
    out["fitted_now_pct"] = out["intercept_pct"] + slope * s["x_last"] - trims
    out["mpe_pct"] = last["mpe_pct"].reindex(s.index)
    out["limit_pct"] = last["limit_pct"].reindex(s.index)
    significant = ok & (p_value < significance) & (slope != 0)
    out["status"] = np.where(~ok, "too few tests", np.where(significant, "trend", "no significant trend"))
    for col, limit in (("predicted_out_of_tolerance", "mpe_pct"), ("predicted_acceptance_limit", "limit_pct")):
        target = np.sign(slope) * out[limit]
        x_cross = (target + trims - out["intercept_pct"]) / slope
        keep = significant & (x_cross - s["x_last"] <= horizon_years)
        days = (x_cross * DAYS_PER_YEAR).where(keep)
        out[col] = (s["ref_date"] + pd.to_timedelta(days.round(), unit="D")).dt.strftime("%Y-%m-%d")
    return out.reset_index()[FIT_COLUMNS]


def per_asset(fits: pd.DataFrame) -> pd.DataFrame:
    """The worst point of each asset: earliest predicted date, else the fastest fitted drift."""
    if fits.empty:
        return pd.DataFrame(columns=ASSET_COLUMNS).set_index("asset", drop=False)
    f = fits.assign(_when=pd.to_datetime(fits["predicted_out_of_tolerance"], format="%Y-%m-%d"),
                    _rate=-fits["slope_pct_per_year"].abs().fillna(-1.0), _n=-fits["n"])
    worst = f.sort_values(["asset", "_when", "_rate", "_n"], na_position="last", kind="stable").groupby("asset").head(1)
    trend = (fits["status"] == "trend").groupby(fits["asset"]).any()
    fitted = (fits["status"] != "too few tests").groupby(fits["asset"]).any()
    status = pd.Series(np.where(trend, "trend", np.where(fitted, "no significant trend", "too few tests")),
                       index=trend.index)
    out = pd.DataFrame({
        "asset": worst["asset"].to_numpy(), "drift_input_pct": worst["input_pct"].to_numpy(),
        "drift_pct_span_per_year": worst["slope_pct_per_year"].to_numpy(), "drift_stderr": worst["stderr"].to_numpy(),
        "drift_n": worst["n"].to_numpy(),
        "predicted_out_of_tolerance": worst["predicted_out_of_tolerance"].to_numpy(),
        "predicted_acceptance_limit": worst["predicted_acceptance_limit"].to_numpy(),
    })
    out["drift_status"] = out["asset"].map(status)
    out.loc[out["drift_status"] == "too few tests", "drift_input_pct"] = np.nan
    return out.set_index("asset", drop=False).rename_axis(None)[ASSET_COLUMNS]


def compute(ctx: RunContext) -> pd.DataFrame:
    """Fill the drift extras once per run; return the per-asset table."""
    if keys.DRIFT_ASSETS in ctx.stash:
        return ctx.stash[keys.DRIFT_ASSETS]  # type: ignore[no-any-return]
    cfg = settings(ctx)
    pts = drift_points(history.assemble(ctx))
    fits = fit(pts, int(cfg["min_tests"]), float(cfg["significance"]), float(cfg["horizon_years"]))
    ctx.stash[keys.DRIFT_POINTS] = pts.drop(columns=["in_fit", "mpe_pct", "limit_pct"])
    ctx.stash[keys.DRIFT_FITS] = fits
    ctx.stash[keys.DRIFT_ASSETS] = per_asset(fits)
    return ctx.stash[keys.DRIFT_ASSETS]  # type: ignore[no-any-return]


def _dates(values: pd.Series) -> list[str]:
    return [v if isinstance(v, str) and v else "—" for v in values.tolist()]


@hookimpl
def ll_history(ctx: RunContext) -> list[Finding]:
    compute(ctx)
    return []


@hookimpl
def ll_config_keys() -> dict[str, list[str]]:
    return {"drift": list(DEFAULTS)}


@hookimpl
def ll_configure(config: dict[str, Any]) -> list[Finding]:
    section = config.get("drift", {})
    if not isinstance(section, dict):
        return [error("[drift] must be a table", file="loopledger.toml", field="drift")]
    found = []
    checks = {"min_tests": lambda v: isinstance(v, int) and v >= 3,
              "significance": lambda v: isinstance(v, int | float) and 0 < v < 1,
              "horizon_years": lambda v: isinstance(v, int | float) and v > 0}
    for key, value in section.items():
        if key not in checks:
            found.append(error(f"[drift] has no setting '{key}' (known: {', '.join(checks)})",
                               file="loopledger.toml", field=f"drift.{key}"))
        elif not checks[key](value):
            found.append(error(f"[drift] {key} = {value!r} is out of range (min_tests ≥ 3; 0 < significance < 1; "
                               "horizon_years > 0)", file="loopledger.toml", field=f"drift.{key}"))
    return found


@hookimpl
def ll_asset_sections(ctx: RunContext, assets: list[str]) -> dict[str, list[Section]]:
    compute(ctx)
    fits = ctx.stash[keys.DRIFT_FITS]
    mine = fits[fits["asset"].isin(assets)]
    columns = zip(cells(mine["input_pct"], "%g %%"), [str(v) for v in mine["n"].tolist()],
                  cells(mine["slope_pct_per_year"], "%+.4f"), cells(mine["stderr"], "%.4f"),
                  cells(mine["p_value"], "%.3f"), cells(mine["fitted_now_pct"], "%+.3f"),
                  cells(mine["mpe_pct"], "%.3f"), mine["status"].tolist(),
                  _dates(mine["predicted_acceptance_limit"]), _dates(mine["predicted_out_of_tolerance"]), strict=True)
    return {asset: [Section(title="Drift per test point (as-found error vs time, reset at each adjustment)",
                            kind="table", rows=rows, order=32,
                            columns=["Point", "Tests", "Drift % span/yr", "Std error", "p",
                                     "Fitted error at last test % span", "MPE % span", "Trend",
                                     "Reaches acceptance limit", "Reaches MPE"])]
            for asset, rows in grouped(mine["asset"], map(list, columns)).items()}


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    if keys.DRIFT_FITS not in ctx.stash:
        return {}
    return {"drift": ctx.stash[keys.DRIFT_FITS], "drift_points": ctx.stash[keys.DRIFT_POINTS]}
