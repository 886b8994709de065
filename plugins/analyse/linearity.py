"""Single-test analysis (ISA-51.1 / IEC 61298-2 terms), per test and phase, all in % of output span.

From each point's error in % of span (e) against its input in % of range (x):

- ``zero_error_pct``: e at 0 % input; ``span_error_pct``: e(100 %) − e(0 %);
- ``nonlin_terminal_pct``: largest |deviation| of the mean curve (up and down runs averaged
  per input) from the terminal line through its 0 % and 100 % points;
- ``nonlin_independent_pct``: largest |deviation| of the mean curve from the straight line that
  minimises that largest deviation (ISA-51.1 "independent" line, a minimax fit);
- ``hysteresis_pct``: largest |e(up) − e(down)| at the same input, where both runs exist;
- ``nonrepeatability_pct``: largest spread (max − min) of the output at one input and direction,
  from repeated points (cycles) or the repeat readings of one point;
- ``trim_zero`` / ``trim_span``: the zero shift and the span change (% of span) that bring every
  point closest to zero error — the minimax line through all points, negated — and
  ``worst_after_trim_pct``, the largest |error| left after it.

The minimax line of a set of points is the levelled line of its worst three-point reference
(discrete Chebyshev approximation: for any line the largest deviation is at least every
reference's levelled error, with equality at the optimum), computed for all tests at once;
scipy's linear programme is the fallback for degenerate or very long sets.

The tests table carries the as-found phase's values (the state the device was found in, which
the trim applies to); ``analysis.csv`` has both phases.
"""

from __future__ import annotations

from itertools import combinations

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.cells import cells
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl

TEST_COLUMNS = ["zero_error_pct", "span_error_pct", "nonlin_terminal_pct", "nonlin_independent_pct",
                "hysteresis_pct", "nonrepeatability_pct", "trim_zero", "trim_span", "worst_after_trim_pct"]
KEYS = ["test", "phase"]
#: the phases a page shows, in this order
PHASES = ("as_found", "as_left")
#: inputs closer than this (in % of range) count as the same test point
SAME_INPUT = 1e-6
#: sets longer than this use the linear programme rather than every three-point reference
MAX_REFERENCE_POINTS = 40


def minimax_line(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """(intercept, slope, largest deviation) of the minimax straight line, by linear programme."""
    from scipy.optimize import linprog

    n = len(x)
    if n == 0 or not (np.isfinite(x).all() and np.isfinite(y).all()):  # no line through an infinite value
        return np.nan, np.nan, np.nan
    ones = np.ones(n)
    a_ub = np.vstack([np.column_stack([-ones, -x, -ones]), np.column_stack([ones, x, -ones])])
    b_ub = np.concatenate([-y, y])
    res = linprog([0.0, 0.0, 1.0], A_ub=a_ub, b_ub=b_ub, bounds=[(None, None), (None, None), (0, None)],
                  method="highs")
    return float(res.x[0]), float(res.x[1]), float(res.x[2])


def minimax_lines(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Minimax lines of many sets at once: ``x``, ``y`` are (sets, n) sorted by x, NaN-padded at the end.

    Returns (intercept, slope, largest deviation) per set.
    """
    sets, n = x.shape
    a0 = np.full(sets, np.nan)
    b0 = np.full(sets, np.nan)
    level_max = np.full(sets, np.nan)
    count = np.sum(~np.isnan(x), axis=1)
    if n >= 3:
        tri = np.array(list(combinations(range(n), 3)))
        xi, xj, xk = x[:, tri[:, 0]], x[:, tri[:, 1]], x[:, tri[:, 2]]
        yi, yj, yk = y[:, tri[:, 0]], y[:, tri[:, 1]], y[:, tri[:, 2]]
        with np.errstate(divide="ignore", invalid="ignore"):
            slope = (yk - yi) / (xk - xi)
            half = (yj - (yi + slope * (xj - xi))) / 2.0
        usable = np.isfinite(half) & (xk - xi > SAME_INPUT)
        level = np.where(usable, np.abs(half), -1.0)
        rows = np.arange(sets)
        best = np.argmax(level, axis=1)
        found = level[rows, best] >= 0
        b = slope[rows, best]
        a = yi[rows, best] - b * xi[rows, best] + half[rows, best]
        a0, b0 = np.where(found, a, np.nan), np.where(found, b, np.nan)
        level_max = np.where(found, level[rows, best], np.nan)
    # check each candidate line against all its points; fall back where it is not optimal
    with np.errstate(invalid="ignore"):
        resid = np.abs(y - (a0[:, None] + b0[:, None] * x))
    worst = np.max(np.where(np.isnan(resid), -np.inf, resid), axis=1) if n else np.full(sets, -np.inf)
    dev = np.where(np.isfinite(worst), worst, np.nan)
    with np.errstate(invalid="ignore"):
        redo = ~np.isfinite(dev) | ~(dev <= level_max + 1e-9) | (count < 3)
    for i in np.flatnonzero(redo & (count > 0)):
        m = ~np.isnan(x[i])
        a0[i], b0[i], dev[i] = minimax_line(x[i, m], y[i, m])
    return a0, b0, dev


def _padded(frame: pd.DataFrame, group: str) -> tuple[pd.Index, np.ndarray, np.ndarray]:
    """Groups of ``frame`` (columns group, x, y) as NaN-padded arrays sorted by x."""
    frame = frame.sort_values([group, "x"], kind="stable")
    frame = frame.assign(rank=frame.groupby(group).cumcount())
    x = frame.pivot(index=group, columns="rank", values="x")
    y = frame.pivot(index=group, columns="rank", values="y").reindex(index=x.index, columns=x.columns)
    return x.index, x.to_numpy(dtype=float), y.to_numpy(dtype=float)


def fit_groups(frame: pd.DataFrame, group: str) -> pd.DataFrame:
    """Minimax line per group, using every-reference arrays for sets of equal length at once."""
    sizes = frame.groupby(group).size()
    out = []
    for size, names in sizes.groupby(sizes).groups.items():
        part = frame[frame[group].isin(names)]
        index, x, y = _padded(part, group)
        if size > MAX_REFERENCE_POINTS:
            fits = [minimax_line(xr[~np.isnan(xr)], yr[~np.isnan(yr)]) for xr, yr in zip(x, y, strict=True)]
            a, b, d = (np.array(v) for v in zip(*fits, strict=True))
        else:
            a, b, d = minimax_lines(x, y)
        out.append(pd.DataFrame({"intercept": a, "slope": b, "deviation": d}, index=index))
    return pd.concat(out) if out else pd.DataFrame(columns=["intercept", "slope", "deviation"])


def analyse(points: pd.DataFrame) -> pd.DataFrame:
    """One row per (test, phase) with the columns of :data:`TEST_COLUMNS`."""
    key_all = points.groupby(KEYS, sort=True).ngroup()
    names = points[KEYS].assign(key=key_all).drop_duplicates("key").set_index("key")
    pts = points[KEYS + ["input_pct", "error_pct_span", "direction"]].assign(key=key_all)
    pts = pts[pts["input_pct"].notna() & pts["error_pct_span"].notna()]
    pts["x"] = (pts["input_pct"] / SAME_INPUT).round() * SAME_INPUT
    pts["y"] = pts["error_pct_span"]
    curve = pts.groupby(["key", "x"], as_index=False)["y"].mean()
    out = pd.DataFrame(index=pd.Index(pts["key"].unique(), name="key"))
    at0 = curve[curve["x"].abs() < SAME_INPUT].set_index("key")["y"]
    at100 = curve[(curve["x"] - 100.0).abs() < SAME_INPUT].set_index("key")["y"]
    out["zero_error_pct"] = at0.reindex(out.index)
    out["span_error_pct"] = (at100 - at0).reindex(out.index)
    ends = curve.join(at0.rename("y0"), on="key").join(at100.rename("y100"), on="key")
    ends["dev"] = (ends["y"] - (ends["y0"] + (ends["y100"] - ends["y0"]) * ends["x"] / 100.0)).abs()
    out["nonlin_terminal_pct"] = ends.groupby("key")["dev"].max().reindex(out.index)
    out["nonlin_independent_pct"] = fit_groups(curve, "key")["deviation"].reindex(out.index)
    runs = pts.groupby(["key", "x", "direction"])["y"].mean().unstack("direction")
    if {"up", "down"} <= set(runs.columns):
        out["hysteresis_pct"] = (runs["up"] - runs["down"]).abs().groupby("key").max().reindex(out.index)
    else:
        out["hysteresis_pct"] = np.nan
    spread = pts.fillna({"direction": ""}).groupby(["key", "x", "direction"])["y"].agg(["max", "min", "size"])
    cycles = (spread["max"] - spread["min"]).where(spread["size"] > 1).groupby("key").max()
    out["nonrepeatability_pct"] = cycles.reindex(out.index)
    if "repeat_spread_pct" in points.columns:
        within = points["repeat_spread_pct"].groupby(key_all).max()
        out["nonrepeatability_pct"] = out["nonrepeatability_pct"].combine(within.reindex(out.index), np.fmax)
    trim = fit_groups(pts[["key", "x", "y"]], "key").reindex(out.index)
    out["trim_zero"] = -trim["intercept"]
    out["trim_span"] = -trim["slope"] * 100.0
    out["worst_after_trim_pct"] = trim["deviation"]
    return names.join(out, how="inner").reset_index(drop=True)


def repeat_spread_pct(points: pd.DataFrame) -> pd.Series:
    """Max − min of the repeat readings of each point, in % of output span (NaN without repeats)."""
    from loopledger import quantities as q

    out = pd.Series(np.nan, index=points.index, dtype=float)
    if "readings" not in points.columns or "reading_sensitivity" not in points.columns:
        return out
    has = points["readings"].map(lambda v: isinstance(v, list | tuple) and len(v) > 1)
    if not has.any():
        return out
    long = points.loc[has, "readings"].explode()
    parsed = q.parse_column(long.astype(str).reset_index(drop=True))  # convert() needs a unique index
    values = q.convert(parsed["value"], parsed["unit"], pd.Series(points.loc[long.index, "reading_unit"].to_numpy()))
    values.index = long.index
    rng = values.groupby(level=0).max() - values.groupby(level=0).min()
    span = points.loc[rng.index, "span"].abs()
    out[rng.index] = rng * points.loc[rng.index, "reading_sensitivity"].abs() / span * 100.0
    return out


def stage(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    if pts.empty:
        return []
    pts["repeat_spread_pct"] = repeat_spread_pct(pts)
    table = analyse(pts)
    ctx.stash[keys.ANALYSIS] = table
    found = table[table["phase"] == "as_found"].set_index("test")
    tests = ctx.tests.set_index("test", drop=False)
    for col in TEST_COLUMNS:
        tests[col] = found[col].reindex(tests.index)
    ctx.tests = tests.reset_index(drop=True)
    exports = ctx.stash.setdefault(keys.TEST_EXPORTS, [])
    exports += [c for c in TEST_COLUMNS if c not in exports]
    return []


@hookimpl
def ll_analyse(ctx: RunContext) -> list[Finding]:
    return stage(ctx)


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    table = ctx.stash.get(keys.ANALYSIS)
    return {} if table is None else {"analysis": table.sort_values(KEYS, kind="stable")}


#: quantities with a direction (the rest are magnitudes)
SIGNED = ("zero_error_pct", "span_error_pct", "trim_zero", "trim_span")
LABELS = {"zero_error_pct": "Zero error", "span_error_pct": "Span error",
          "nonlin_terminal_pct": "Non-linearity, terminal-based",
          "nonlin_independent_pct": "Non-linearity, independent",
          "hysteresis_pct": "Hysteresis", "nonrepeatability_pct": "Non-repeatability",
          "trim_zero": "Suggested zero trim", "trim_span": "Suggested span trim",
          "worst_after_trim_pct": "Predicted worst error after trim"}


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    table = ctx.stash.get(keys.ANALYSIS)
    if table is None:
        return {}
    mine = table[table["test"].isin(tests)]
    # each value as the page shows it, one column at a time over the whole batch
    text = {col: cells(mine[col], "%+.3f %%" if col in SIGNED else "%.3f %%") for col in TEST_COLUMNS}
    by_test: dict[str, dict[str, int]] = {}  # test -> phase -> row of ``mine``
    for i, (test, phase) in enumerate(zip(mine["test"].tolist(), mine["phase"].tolist(), strict=True)):
        by_test.setdefault(str(test), {}).setdefault(phase, i)
    out = {}
    for test, rows_at in by_test.items():
        phases = [p for p in PHASES if p in rows_at]
        rows = [[LABELS[col], *(text[col][rows_at[p]] for p in phases)] for col in TEST_COLUMNS]
        out[test] = [Section(title="Linearity, hysteresis and trim (% of output span; ISA-51.1 terms)", kind="table",
                             columns=["Quantity", *(p.replace("_", "-") for p in phases)], rows=rows, order=30)]
    return out
