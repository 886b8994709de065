"""History stage: every asset's tests in date order, as-found and as-left error per test point.

Points of different tests are matched by their input as % of range (rounded to
the nearest 0.5 %), so "0 A", "0 %" and "0.0 A" written in different years are one test
point. Where a phase holds several readings at one input (up and down, or
repeats) the error at that point is their mean; ``*_ratio`` is the largest
|error| / MPE there, so the worst reading still shows.

Leaves ``ctx.stash[keys.HISTORY]``: one row per (asset, test, input_pct) with
date, as_found_pct, as_left_pct (error in % of span), as_found_ratio,
as_left_ratio, mpe_pct, limit_pct (acceptance limit in % of span), and the
test's verdict, adjusted flag, technician, method and instruments.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.cells import cells, grouped, texts
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl

#: input % is matched between tests to the nearest multiple of this step (% of range), so a set
#: point injected at 24.8 % one year and 25.1 % the next is one test point
KEY_STEP = 0.5
PHASES = ("as_found", "as_left")
TEST_FIELDS = ("verdict", "adjusted", "technician", "method", "source", "meter", "shunt")
COLUMNS = ["asset", "test", "date", "input_pct", "as_found_pct", "as_left_pct", "as_found_ratio", "as_left_ratio",
           "mpe_pct", "limit_pct", *TEST_FIELDS]


def assemble(ctx: RunContext) -> pd.DataFrame:
    """The history table (computed once per run, then taken from ``ctx.extras``)."""
    if keys.HISTORY in ctx.stash:
        return ctx.stash[keys.HISTORY]  # type: ignore[no-any-return]
    hist = _assemble(ctx.points, ctx.tests)
    ctx.stash[keys.HISTORY] = hist
    return hist


def empty() -> pd.DataFrame:
    """The history table with no rows (numbers typed as numbers)."""
    numeric = {"input_pct", "as_found_pct", "as_left_pct", "as_found_ratio", "as_left_ratio", "mpe_pct", "limit_pct"}
    return pd.DataFrame({c: pd.Series(dtype=float if c in numeric else object) for c in COLUMNS})


def _assemble(points: pd.DataFrame, tests: pd.DataFrame) -> pd.DataFrame:
    needed = {"asset", "test", "date", "phase", "input_pct", "error", "error_pct_span", "mpe", "span"}
    if points.empty or not needed <= set(points.columns):
        return empty()
    p = points.dropna(subset=["input_pct", "error_pct_span"])
    span = p["span"].abs()
    limit = p["acceptance_limit"] if "acceptance_limit" in p.columns else p["mpe"]
    frame = pd.DataFrame({
        "asset": p["asset"].astype(str), "test": p["test"].astype(str), "date": p["date"].astype(str),
        "phase": p["phase"].astype(str),
        "input_pct": (p["input_pct"].astype(float) / KEY_STEP).round() * KEY_STEP + 0.0,  # + 0.0: no "-0 %"
        "error_pct": p["error_pct_span"].astype(float),
        "ratio": p["error"].abs() / p["mpe"],
        "mpe_pct": p["mpe"] / span * 100.0,
        "limit_pct": limit.astype(float) / span * 100.0,
    })
    keys = ["asset", "test", "date", "input_pct"]
    by_phase = frame.groupby([*keys, "phase"], sort=False).agg(
        error_pct=("error_pct", "mean"), ratio=("ratio", "max"))
    wide = by_phase.unstack("phase")
    out = pd.DataFrame(index=wide.index)
    for phase in PHASES:
        for col, name in (("error_pct", f"{phase}_pct"), ("ratio", f"{phase}_ratio")):
            out[name] = wide[(col, phase)] if (col, phase) in wide.columns else np.nan
    limits = frame.groupby(keys, sort=False)[["mpe_pct", "limit_pct"]].min()
    out = out.join(limits).reset_index()
    info = tests.set_index("test")
    for field in TEST_FIELDS:
        out[field] = out["test"].map(info[field]) if field in info.columns else None
    return out.sort_values(["asset", "date", "test", "input_pct"], kind="stable").reset_index(drop=True)[COLUMNS]


def asset_tables(hist: pd.DataFrame) -> dict[str, tuple[list[str], list[list[str]]]]:
    """Columns and rows of the history table of each asset page (newest test first), for all at once.

    ``hist`` is (a selection of) the history table, in its (asset, date, test, input_pct) order.
    A row per test (date, verdict, technician, rig), a column per test point of the asset (its
    inputs in order), each cell ``as-found / as-left``; "" where a test has no such point.
    """
    asset, names = pd.factorize(hist["asset"])  # 0, 0, ..., 1, 1, ...: each asset's points are together
    first = ~hist["test"].duplicated().to_numpy()  # each test's first point
    test_of = first.cumsum() - 1  # each point's test, counting tests in table order
    owner = asset[first]  # each test's asset
    begin = np.searchsorted(owner, np.arange(len(names)), side="left")  # each asset's tests, oldest first
    end = np.searchsorted(owner, np.arange(len(names)), side="right")
    at = begin[owner] + end[owner] - 1 - np.arange(len(owner))  # row of each test: newest first
    col = hist["input_pct"].groupby(asset).rank(method="dense").to_numpy(dtype=int) - 1  # column of each point
    width = int(col.max()) + 1 if len(col) else 0
    grid = np.full((len(owner), 4 + width), "", dtype=object)
    heads = hist[first]
    text = {f: texts(heads[f]) for f in ("date", "verdict", "technician", "method", "source", "meter", "shunt")}
    grid[at, 0] = text["date"]
    grid[at, 1] = text["verdict"]
    grid[at, 2] = text["technician"]
    grid[at, 3] = [", ".join(filter(None, rig))
                   for rig in zip(text["method"], text["source"], text["meter"], text["shunt"], strict=True)]
    grid[at[test_of], 4 + col] = [f"{a} / {b}" for a, b in zip(cells(hist["as_found_pct"], "%+.3f"),
                                                               cells(hist["as_left_pct"], "%+.3f"), strict=True)]
    rows = grid.tolist()
    # each asset's inputs in order: one point per (asset, column)
    _, one = np.unique(asset * width + col, return_index=True)
    inputs = grouped(asset[one].tolist(), hist["input_pct"].to_numpy()[one].tolist())
    out = {}
    for a, name in enumerate(names.tolist()):
        xs = inputs[str(a)]
        out[str(name)] = (["Date", "Verdict", "Technician", "Rig", *[f"{x:g} %: found / left" for x in xs]],
                          [r[:4 + len(xs)] for r in rows[begin[a]:end[a]]])
    return out


@hookimpl
def ll_history(ctx: RunContext) -> list[Finding]:
    assemble(ctx)
    return []


@hookimpl
def ll_asset_sections(ctx: RunContext, assets: list[str]) -> dict[str, list[Section]]:
    hist = assemble(ctx)
    return {asset: [Section(title="Test history: error at each test point (% of span)", kind="table",
                            columns=columns, rows=rows, order=30)]
            for asset, (columns, rows) in asset_tables(hist[hist["asset"].isin(assets)]).items()}
