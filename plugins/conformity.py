"""Capability and risk per point, after judgement: ``tur`` and ``risk``.

- ``tur`` = MPE / U, the test uncertainty ratio (ANSI/NCSL Z540.3: tolerance span / 2·U95);
  a test with a point below 4:1 gets a warning (Z540.3's alternative to estimating false-accept
  risk);
- ``risk`` = probability that the true error lies outside ±MPE given the measured error and u
  (JCGM 106:2012 specific risk, normal model).

Runs as a ``trylast`` judge so the error and MPE are already there.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from loopledger.context import RunContext
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl
from loopledger.plugins.decision_rules import specific_risk

#: below this TUR a test gets a warning (ANSI/NCSL Z540.3 §5.3 alternative)
MIN_TUR = 4.0


def conformity(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    if pts.empty or "U" not in pts.columns:
        return []
    with np.errstate(divide="ignore", invalid="ignore"):
        pts["tur"] = pts["mpe"] / pts["U"]
        pts["risk"] = specific_risk(pts["error"], pts["u"], pts["mpe"])
    ctx.points = pts
    exports = ctx.extras.setdefault("point_exports", [])
    exports += [c for c in ("tur", "risk") if c not in exports]
    findings: list[Finding] = []
    low = pts[pts["tur"] < MIN_TUR]
    for rel, rows in low.groupby("source_file", sort=False):
        worst = rows.loc[rows["tur"].idxmin()]
        findings.append(warning(
            f"TUR {worst['tur']:.2g}:1 is below {MIN_TUR:g}:1 at {len(rows)} point(s) (U ±{worst['U']:.3g} "
            f"{worst['output_unit']} against MPE ±{worst['mpe']:.3g}); the rig is not good enough for a "
            f"TUR-based decision (ANSI/NCSL Z540.3)", file=str(rel), line=int(worst["line"]),
            point=f"{worst['phase']} #{worst['point']}", field="instruments", code="low-tur"))
    rule = str(pts["decision_rule"].iloc[0]) if "decision_rule" in pts.columns else "simple"
    if rule != "simple":
        empty = pts[(pd.to_numeric(pts["acceptance_limit"], errors="coerce").fillna(0.0) <= 0.0)]
        for rel, rows in empty.groupby("source_file", sort=False):
            first = rows.iloc[0]
            findings.append(warning(
                f"rule '{rule}': the acceptance zone is empty at {len(rows)} point(s) (U ±{first['U']:.3g} "
                f"≥ MPE ±{first['mpe']:.3g} {first['output_unit']}): no point can pass with this rig",
                file=str(rel), line=int(first["line"]), point=f"{first['phase']} #{first['point']}",
                field="instruments", code="empty-acceptance-zone"))
    return findings


@hookimpl(trylast=True)
def ll_judge(ctx: RunContext) -> list[Finding]:
    return conformity(ctx)
