"""History stage: every asset's tests in date order, as-found and as-left error per test point.

Points of different tests are matched by their input as % of range (rounded to
the nearest 0.5 %), so "0 A", "0 %" and "0.0 A" written in different years are one test
point. Where a phase holds several readings at one input (up and down, or
repeats) the error at that point is their mean; ``*_ratio`` is the largest
|error| / MPE there, so the worst reading still shows.

Leaves ``ctx.extras["history"]``: one row per (asset, test, input_pct) with
date, as_found_pct, as_left_pct (error in % of span), as_found_ratio,
as_left_ratio, mpe_pct, limit_pct (acceptance limit in % of span), and the
test's verdict, adjusted flag, technician, method and instruments.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger.context import RunContext
from loopledger.contracts import Section, each
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
    if "history" in ctx.extras:
        return ctx.extras["history"]  # type: ignore[no-any-return]
    hist = _assemble(ctx.points, ctx.tests)
    ctx.extras["history"] = hist
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


def records_of(ctx: RunContext, name: str, value: str, by: str = "asset") -> list[dict[str, Any]]:
    """The rows of ``ctx.extras[name]`` whose ``by`` column is ``value``, as dicts (NaN kept).

    Grouped once per run and kept: pages are built one asset / one test at a time, and filtering
    the whole table per page would cost pages × rows.
    """
    cache = ctx.extras.setdefault("_grouped", {})
    if (name, by) not in cache:
        frame = ctx.extras.get(name)
        groups: dict[str, list[dict[str, Any]]] = {}
        if frame is not None and not frame.empty:
            for rec in frame.to_dict("records"):
                groups.setdefault(str(rec[by]), []).append(rec)
        cache[(name, by)] = groups
    return cache[(name, by)].get(value, [])  # type: ignore[no-any-return]


def _missing(value: object) -> bool:
    return value is None or (isinstance(value, float) and np.isnan(value)) or value is pd.NaT


def _fmt(value: Any) -> str:
    return "—" if _missing(value) else f"{value:+.3f}"


def _text(value: object) -> str:
    return "" if _missing(value) else str(value)


def asset_table(records: list[dict[str, Any]]) -> tuple[list[str], list[list[str]]]:
    """Columns and rows of the history table on an asset page (newest test first)."""
    inputs = sorted({r["input_pct"] for r in records})
    columns = ["Date", "Verdict", "Technician", "Rig", *[f"{x:g} %: found / left" for x in inputs]]
    tests: dict[tuple[str, str], dict[str, Any]] = {}
    for r in records:
        entry = tests.setdefault((str(r["date"]), str(r["test"])), {"first": r, "cells": {}})
        entry["cells"][r["input_pct"]] = f"{_fmt(r['as_found_pct'])} / {_fmt(r['as_left_pct'])}"
    rows = []
    for (date, _test), entry in sorted(tests.items(), reverse=True):
        first = entry["first"]
        rig = ", ".join(x for x in (_text(first[k]) for k in ("method", "source", "meter", "shunt")) if x)
        rows.append([date, _text(first["verdict"]), _text(first["technician"]), rig,
                     *[entry["cells"].get(x, "") for x in inputs]])
    return columns, rows


@hookimpl(tryfirst=True)
def ll_history(ctx: RunContext) -> list[Finding]:
    assemble(ctx)
    return []


@hookimpl
def ll_asset_sections(ctx: RunContext, assets: list[str]) -> dict[str, list[Section]]:
    return each(assets, lambda asset: asset_sections(ctx, asset))


def asset_sections(ctx: RunContext, asset: str) -> list[Section]:
    assemble(ctx)
    mine = records_of(ctx, "history", asset)
    if not mine:
        return []
    columns, rows = asset_table(mine)
    return [Section(title="Test history: error at each test point (% of span)", kind="table", columns=columns,
                    rows=rows, order=30)]
