"""Method comparison: what each point's U and TUR would be with the other way of reading the output.

For a test read ``direct`` on a current range: the same meter's voltage range across each shunt
in instruments.yaml; for a test read across a ``shunt``: the same meter's current range. The
budget is the same computation as the uncertainty stage's, on the point as it would have read
(the measured output × R, or the output itself); the repeatability seen in the test is not
carried over, so both sides are compared on instrument terms plus what was observed only for the
method actually used. Kept in ``ctx.stash[keys.METHOD_COMPARISON]`` (exported as
``method_comparison.csv``) and shown on each test page and by ``loopledger explain``. (The test
sheet works out the planned rig's U at its own planned points: :mod:`loopledger.plugins.sheet.rig`.)
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl
from loopledger.plugins.uncertainty import budget
from loopledger.plugins.uncertainty.uncertainty import fmt_all, phase_texts, rows_by, texts

COLUMNS = ["test", "phase", "point", "alternative", "method", "shunt", "U", "tur"]


def _as_read_by(pts: pd.DataFrame, method: Any, shunt: Any, reading: pd.Series, unit: Any) -> pd.DataFrame:
    """``pts`` as they would have been read with ``method`` (a name or one per point), and so on."""
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


def _shunts(ctx: RunContext) -> pd.Series:
    """The resistance of each shunt in the registry (Ω by id, NaN where unreadable)."""
    from loopledger.plugins.measure.reading_methods import shunt_ohms

    shunts = ctx.instruments[ctx.instruments["kind"] == "shunt"] if not ctx.instruments.empty else pd.DataFrame()
    ids = pd.Series(shunts.index, index=shunts.index, dtype=object)
    return shunt_ohms(ctx, ids) if len(shunts) else pd.Series(dtype=float)


def alternatives(ctx: RunContext, pts: pd.DataFrame) -> pd.DataFrame:
    """U and TUR of every point of ``pts`` under each alternative method (long table, :data:`COLUMNS`)."""
    current = q.of_dimension(pts["output_unit"], "A")
    amps = q.convert(pts["measured"], pts["output_unit"], "A")
    frames: list[pd.DataFrame] = []
    direct = pts[(pts["method"] == "direct") & current & pts["meter"].notna()]
    for ident, ohms in _shunts(ctx).items() if len(direct) else []:
        if not np.isfinite(ohms):
            continue
        alt = _as_read_by(direct, "shunt", str(ident), amps[direct.index] * ohms, "V")
        frames.append(_evaluate(ctx, alt, f"shunt {ident} ({ohms:g} Ω) on " + direct["meter"].astype(str) + " volts"))
    shunted = pts[(pts["method"] == "shunt") & current & pts["meter"].notna()]
    if len(shunted):
        alt = _as_read_by(shunted, "direct", None, shunted["measured"], shunted["output_unit"])
        frames.append(_evaluate(ctx, alt, "direct on " + shunted["meter"].astype(str) + " current range"))
    frames = [f for f in frames if len(f)]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=COLUMNS)


def _evaluate(ctx: RunContext, alt: pd.DataFrame, label: Any) -> pd.DataFrame:
    """U and TUR of each point of ``alt`` by the uncertainty stage's budget; ``label`` names the rig, one
    per point (the point's own meter: never another test's)."""
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
    ctx.stash[keys.METHOD_COMPARISON] = alternatives(ctx, ctx.points)
    return []


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    table = ctx.stash.get(keys.METHOD_COMPARISON)
    return {} if table is None else {"method_comparison": table.sort_values(["test", "phase", "point"], kind="stable")}


def comparison_tables(ctx: RunContext, tests: list[str]) -> dict[str, tuple[list[str], list[list[str]]]]:
    """(columns, rows) comparing the method used with each alternative, point by point, for each test."""
    table = ctx.stash.get(keys.METHOD_COMPARISON)
    if table is None or ctx.points.empty:
        return {}
    pts = ctx.points[ctx.points["test"].isin(tests)].sort_values(["test", "phase", "point"], kind="stable")
    mine = table[table["test"].isin(tests)]
    if pts.empty or mine.empty:
        return {}
    # each test's alternatives in the order met, numbered 0, 1, ...
    labels = mine.drop_duplicates(["test", "alternative"])[["test", "alternative"]]
    labels = labels.assign(rank=labels.groupby("test", sort=False).cumcount())
    hits = mine.drop_duplicates(["test", "alternative", "phase", "point"]).merge(labels, on=["test", "alternative"])
    columns = [phase_texts(pts["phase"]), texts(pts["point"]), fmt_all(pts["U"]), fmt_all(pts["tur"], 3)]
    point_keys = pts[["test", "phase", "point"]]
    for rank in range(int(labels["rank"].max()) + 1):
        hit = point_keys.merge(hits[hits["rank"] == rank], on=["test", "phase", "point"], how="left")
        found = hit["alternative"].notna().to_numpy()
        columns += [np.where(found, fmt_all(hit["U"]), "—"), np.where(found, fmt_all(hit["tur"], 3), "—")]
    names = labels.groupby("test", sort=False)["alternative"].agg(list)
    used = pts.drop_duplicates("test").set_index("test")["method"].astype(str)
    out = {}
    for test, rows in rows_by(pts["test"], columns).items():
        if test not in names.index:
            continue
        heads = ["Phase", "#", f"U as read ({used[test]})", "TUR"]
        for label in names[test]:
            heads += [f"U with {label}", "TUR"]
        out[test] = (heads, [row[:len(heads)] for row in rows])
    return out


def comparison_rows(ctx: RunContext, test: str) -> tuple[list[str], list[list[str]]]:
    """(columns, rows) of :func:`comparison_tables` for one test (``loopledger explain``)."""
    return comparison_tables(ctx, [test]).get(str(test), ([], []))


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    found = comparison_tables(ctx, tests)
    if not found:
        return {}
    first = ctx.points[ctx.points["test"].isin(list(found))].drop_duplicates("test")
    units = dict(zip(first["test"].astype(str), first["output_unit"].astype(str), strict=True))
    return {test: [Section(title=f"Method comparison: U ({units[test]}) and TUR with the other rig the registry "
                                 "allows", kind="table", columns=columns, rows=rows, order=25, screen_only=True)]
            for test, (columns, rows) in found.items() if rows}
