"""Stage 3, measured output: hand each reading method the points read that way."""

from __future__ import annotations

import numpy as np
from loopledger.context import RunContext
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl


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
    return findings
