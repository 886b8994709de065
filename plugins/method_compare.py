"""Method comparison: what each point's U and TUR would be with the other way of reading the output.

For a test read ``direct`` on a current range: the same meter's voltage range across each shunt
in instruments.yaml; for a test read across a ``shunt``: the same meter's current range. The
budget is the same computation as the uncertainty stage's, on the point as it would have read
(the measured output × R, or the output itself); the repeatability seen in the test is not
carried over, so both sides are compared on instrument terms plus what was observed only for the
method actually used. Kept in ``ctx.extras["method_comparison"]`` (exported as
``method_comparison.csv``) and shown on each test page and by ``loopledger explain``; the
printable site test sheet gets the U and TUR the planned rig would give at the points of the
asset's latest test.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.context import RunContext, rows_of
from loopledger.contracts import Section, each
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl
from loopledger.plugins import budget
from loopledger.plugins.conformity import MIN_TUR
from loopledger.plugins.uncertainty import fmt

COLUMNS = ["test", "phase", "point", "alternative", "method", "shunt", "U", "tur"]


def _as_read_by(pts: pd.DataFrame, method: str, shunt: str | None, reading: pd.Series, unit: str) -> pd.DataFrame:
    alt = pts.copy()
    alt["method"] = method
    alt["shunt"] = shunt
    alt["reading"] = reading
    alt["reading_unit"] = unit
    alt["reading_text"] = ""  # the digits written belong to the reading actually taken
    alt["n_readings"] = 1
    alt["reading_sd"] = np.nan
    alt["reading_half_spread"] = np.nan
    return alt


def alternatives(ctx: RunContext, pts: pd.DataFrame) -> pd.DataFrame:
    """U and TUR of every point of ``pts`` under each alternative method (long table, :data:`COLUMNS`)."""
    current = pts["output_unit"].map(lambda u: q.same_dimension(str(u), "A"))
    amps = q.convert(pts["measured"], pts["output_unit"], "A")
    frames: list[pd.DataFrame] = []
    direct = pts[(pts["method"] == "direct") & current & pts["meter"].notna()]
    shunts = ctx.instruments[ctx.instruments["kind"] == "shunt"] if not ctx.instruments.empty else pd.DataFrame()
    for ident in shunts.index if len(direct) else []:
        from loopledger.plugins.reading_methods import shunt_ohms

        ohms = shunt_ohms(ctx, pd.Series([ident], dtype=object)).iloc[0]
        if not np.isfinite(ohms):
            continue
        alt = _as_read_by(direct, "shunt", str(ident), amps[direct.index] * ohms, "V")
        frames.append(_evaluate(ctx, alt, f"shunt {ident} ({ohms:g} Ω) on {_meters(direct)} volts"))
    shunted = pts[(pts["method"] == "shunt") & current & pts["meter"].notna()]
    if len(shunted):
        alt = _as_read_by(shunted, "direct", None, shunted["measured"], "")
        alt["reading_unit"] = shunted["output_unit"]
        frames.append(_evaluate(ctx, alt, f"direct on {_meters(shunted)} current range"))
    frames = [f for f in frames if len(f)]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=COLUMNS)


def _meters(pts: pd.DataFrame) -> str:
    return "/".join(sorted(str(m) for m in pd.unique(pts["meter"].dropna())))


def _evaluate(ctx: RunContext, alt: pd.DataFrame, label: str) -> pd.DataFrame:
    _, per, problems = budget.compute(ctx, alt)
    frame = alt[["test", "phase", "point", "method", "shunt"]].copy()
    frame["alternative"] = label
    frame["U"] = per["U"]
    with np.errstate(divide="ignore", invalid="ignore"):
        frame["tur"] = alt["mpe"] / per["U"]
    return frame[COLUMNS].reset_index(drop=True)


@hookimpl
def ll_analyse(ctx: RunContext) -> list[Finding]:
    if ctx.points.empty or "U" not in ctx.points.columns:
        return []
    ctx.extras["method_comparison"] = alternatives(ctx, ctx.points)
    return []


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    table = ctx.extras.get("method_comparison")
    return {} if table is None else {"method_comparison": table.sort_values(["test", "phase", "point"], kind="stable")}


def comparison_rows(ctx: RunContext, test: str) -> tuple[list[str], list[list[str]]]:
    """(columns, rows) comparing the method used with each alternative, point by point."""
    table = ctx.extras.get("method_comparison")
    pts = rows_of(ctx.points, "test", test).sort_values(["phase", "point"])
    if table is None or pts.empty:
        return [], []
    mine = rows_of(table, "test", test)
    labels = list(pd.unique(mine["alternative"]))
    if not labels:
        return [], []
    used = str(pts["method"].iloc[0])
    columns = ["Phase", "#", f"U as read ({used})", "TUR"]
    for label in labels:
        columns += [f"U with {label}", "TUR"]
    rows = []
    for r in pts.itertuples():
        row = [str(r.phase).replace("_", "-"), str(r.point), fmt(r.U), fmt(r.tur, 3)]
        for label in labels:
            hit = mine[(mine["alternative"] == label) & (mine["phase"] == r.phase) & (mine["point"] == r.point)]
            row += [fmt(hit["U"].iloc[0]), fmt(hit["tur"].iloc[0], 3)] if len(hit) else ["—", "—"]
        rows.append(row)
    return columns, rows


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    return each(tests, lambda test: test_sections(ctx, test))


def test_sections(ctx: RunContext, test: str) -> list[Section]:
    if ctx.points.empty:
        return []
    columns, rows = comparison_rows(ctx, test)
    if not rows:
        return []
    unit = str(rows_of(ctx.points, "test", test)["output_unit"].iloc[0])
    return [Section(title=f"Method comparison: U ({unit}) and TUR with the other rig the registry allows",
                    kind="table", columns=columns, rows=rows, order=25)]


def planned(ctx: RunContext, asset: str, plan: dict[str, Any]) -> pd.DataFrame:
    """U and TUR at the points of the asset's latest test, had they been read with the planned rig."""
    pts = rows_of(ctx.points, "asset", asset) if not ctx.points.empty else ctx.points
    if pts.empty or "mpe" not in pts.columns:
        return pd.DataFrame(columns=COLUMNS)
    latest = pts.sort_values(["date", "test"]).iloc[-1]["test"]
    pts = pts[(pts["test"] == latest) & pts["measured"].notna()]
    if plan.get("meter"):
        pts = pts.assign(meter=plan["meter"])
    method = plan.get("method")
    if method == "shunt":
        from loopledger.plugins.reading_methods import shunt_ohms

        shunts = ctx.instruments[ctx.instruments["kind"] == "shunt"] if not ctx.instruments.empty else pd.DataFrame()
        ids = pd.Series(shunts.index, index=shunts.index, dtype=object)
        ohms = shunt_ohms(ctx, ids) if len(shunts) else pd.Series(dtype=float)
        wanted = plan.get("shunt_ohm")
        match = ohms[np.isclose(ohms, float(wanted))] if wanted is not None else ohms
        if match.empty:
            return pd.DataFrame(columns=COLUMNS)
        ident, value = str(match.index[0]), float(match.iloc[0])
        amps = q.convert(pts["measured"], pts["output_unit"], "A")
        return _evaluate(ctx, _as_read_by(pts, "shunt", ident, amps * value, "V"), f"shunt {ident} ({value:g} Ω)")
    if method == "direct":
        alt = _as_read_by(pts, "direct", None, pts["measured"], "")
        alt["reading_unit"] = pts["output_unit"]
        return _evaluate(ctx, alt, "direct")
    return pd.DataFrame(columns=COLUMNS)


@hookimpl
def ll_sheet_sections(ctx: RunContext, plans: dict[str, dict[str, Any]]) -> dict[str, list[Section]]:
    return each(plans, lambda asset: sheet_sections(ctx, asset, plans[asset]))


def sheet_sections(ctx: RunContext, asset: str, plan: dict[str, Any]) -> list[Section]:
    table = planned(ctx, asset, plan)
    if table.empty:
        return []
    pts = rows_of(ctx.points, "test", table["test"].iloc[0]).set_index(["phase", "point"])
    rows = []
    for r in table.itertuples():
        mpe = pts.at[(r.phase, r.point), "mpe"]
        rows.append([str(r.phase).replace("_", "-"), str(r.point), fmt(pts.at[(r.phase, r.point), "input_pct"], 3),
                     fmt(mpe), fmt(r.U), fmt(r.tur, 3), "yes" if r.tur >= MIN_TUR else "no"])
    unit = str(pts["output_unit"].iloc[0])
    return [Section(title=f"Expected U ({unit}) and TUR with the planned rig: {table['alternative'].iloc[0]}",
                    kind="table", columns=["Phase", "#", "Input %", "MPE ±", "U", "TUR", f"TUR ≥ {MIN_TUR:g}:1"],
                    rows=rows, order=40)]
