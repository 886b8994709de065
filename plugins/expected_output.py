"""Stage 2, expected output: hand each signal type the points of its assets."""

from __future__ import annotations

import numpy as np
from loopledger.context import RunContext
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl
from loopledger.plugins.scaling import where

#: inputs this far outside the asset's range are flagged (bounds of our own: over-range points to 120 %
#: are common practice; beyond these the expected output is an extrapolation the output stage may not follow)
OUTSIDE_PCT = (-5.0, 125.0)


@hookimpl
def ll_expected(ctx: RunContext) -> list[Finding]:
    """Evaluate every point of every signal type (the engine's expected-output stage)."""
    return evaluate_all(ctx)


def evaluate_all(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    findings: list[Finding] = []
    for col in ("input_pct", "expected", "injected", "sensitivity"):
        pts[col] = np.nan
    pts["injected_unit"] = ""
    known = ", ".join(sorted(ctx.signal_types))
    for signal, idx in pts.groupby("signal", sort=False).groups.items():
        handler = ctx.signal_types.get(str(signal))
        if handler is None:
            first = pts.loc[idx].drop_duplicates("source_file")
            findings += [error(f"asset {r.asset} has signal '{signal}', which no loaded plugin handles "
                               f"(known: {known}); check the spelling in assets.csv, or install the site "
                               "plugin that provides it (`loopledger plugins` lists what is loaded)",
                               file=r.source_file, field="signal") for r in first.itertuples()]
            continue
        frame, more = handler.evaluate(pts.loc[idx], ctx)
        findings += more
        for col in frame.columns:
            pts.loc[idx, col] = frame[col]
    ctx.points = pts
    low, high = OUTSIDE_PCT
    outside = pts.index[(pts["input_pct"] < low) | (pts["input_pct"] > high)]
    findings += [warning(f"input at {pts.at[i, 'input_pct']:.0f} % of the asset's input range: outside it the "
                         "expected output is extrapolated, and a 4-20 mA output stops near 3.8 and 20.5 mA "
                         "(NE 43); check the input written", field="input", **where(pts, i)) for i in outside]
    return findings
