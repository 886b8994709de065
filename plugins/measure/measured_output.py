"""Stage 3, measured output: hand each reading method the points read that way."""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger.context import RunContext
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.scaling import where


@hookimpl
def ll_measured(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    pts["measured"] = np.nan
    findings: list[Finding] = []
    for method, idx in pts.groupby("method", sort=False).groups.items():
        handler = ctx.methods[str(method)]  # unknown methods were refused by the schema check
        value, more = handler.measured(pts.loc[idx], ctx)
        pts.loc[idx, "measured"] = value
        findings += more
    ctx.points = pts
    return findings + _impossible(pts)


#: a reading beyond this many output spans outside the output range is taken for a wrong unit, not a
#: measurement (a bound of our own: a 4-20 mA loop reading 180 mA, or a 0-10 V output 100 V, is not a
#: transducer out of tolerance but "MA" typed for "mA", or "V" for "mV")
IMPOSSIBLE_SPANS = 10.0


def _impossible(pts: pd.DataFrame) -> list[Finding]:
    """An error, not a fail, for a reading no output of this range can give."""
    if pts.empty:
        return []
    low = pts[["output_min", "output_max"]].astype(float).min(axis=1)
    high = pts[["output_min", "output_max"]].astype(float).max(axis=1)
    margin = IMPOSSIBLE_SPANS * (high - low)
    bad = pts.index[(pts["measured"] < low - margin) | (pts["measured"] > high + margin)]
    out: list[Finding] = []
    for i in bad:
        unit = pts.at[i, "output_unit"]
        written = f"{pts.at[i, 'reading']:g} {pts.at[i, 'reading_unit']}"
        out.append(error(f"reading '{written}' is {pts.at[i, 'measured']:.4g} {unit}, beyond anything a "
                         f"{pts.at[i, 'output_min']:g}-{pts.at[i, 'output_max']:g} {unit} output can give: check "
                         "the unit written (M is mega, m milli)", field="reading", **where(pts, i)))
    return out
