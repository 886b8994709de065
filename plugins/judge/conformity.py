"""Capability and risk per point, after judgement: ``tur`` and ``risk``.

- ``tur`` = MPE / U, the test uncertainty ratio (ANSI/NCSL Z540.3: tolerance span / 2·U95);
  a test with a point below 4:1 gets a warning (Z540.3's alternative to estimating false-accept
  risk);
- ``risk`` = probability that the true error lies outside ±MPE given the measured error and u
  (JCGM 106:2012 specific risk; normal model, or a scaled and shifted t at finite ν_eff,
  JCGM 101:2008 §6.4.9; from the simulated distribution where U came from Monte Carlo).

Runs after the judge plugins that add the error, MPE and acceptance limit (``@needs``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl, needs
from loopledger.plugins.judge.decision_rules import specific_risk

#: below this TUR a test gets a warning (ANSI/NCSL Z540.3 §5.3 alternative)
MIN_TUR = 4.0
#: the point columns the findings read
SHOWN = ["source_file", "line", "phase", "point", "tur", "U", "mpe", "output_unit"]


def worst_per_file(rows: pd.DataFrame, by: str) -> pd.DataFrame:
    """One row per source file: the row with the smallest ``by``, and ``n_points`` of the file's rows."""
    counts = rows.groupby("source_file").size().rename("n_points")
    first = rows.sort_values(["source_file", by], kind="stable").drop_duplicates("source_file")
    return first.join(counts, on="source_file")


def conformity(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    if pts.empty or "U" not in pts.columns:
        return []
    with np.errstate(divide="ignore", invalid="ignore"):
        pts["tur"] = pts["mpe"] / pts["U"]
        # u from another plugin's uncertainty stage may be missing: U / k then (k = 2 if absent too)
        u = pts["u"] if "u" in pts.columns else pts["U"] / (pts["k"] if "k" in pts.columns else 2.0)
        nu = pts["nu_eff"] if "nu_eff" in pts.columns else np.inf
        pts["risk"] = specific_risk(pts["error"], u, pts["mpe"], nu)
    quantiles = ctx.stash.get(keys.MC_QUANTILES)
    if isinstance(quantiles, pd.DataFrame) and len(quantiles):
        from loopledger.plugins.uncertainty import montecarlo

        mine = quantiles[quantiles.index.isin(pts.index)]
        pts.loc[mine.index, "risk"] = montecarlo.specific_risk(mine, pts["error"], pts["mpe"])
    ctx.points = pts
    exports = ctx.stash.setdefault(keys.POINT_EXPORTS, [])
    exports += [c for c in ("tur", "risk") if c not in exports]
    findings: list[Finding] = []
    shown = pts[[c for c in SHOWN if c in pts.columns]]  # the columns a message names, not the whole table
    low = worst_per_file(shown[pts["tur"] < MIN_TUR], "tur")
    for w in low.itertuples():
        findings.append(warning(
            f"TUR {w.tur:.2g}:1 is below {MIN_TUR:g}:1 at {w.n_points} point(s) (U ±{w.U:.3g} {w.output_unit} "
            f"against MPE ±{w.mpe:.3g}); the rig is not good enough for a TUR-based decision (ANSI/NCSL Z540.3)",
            file=str(w.source_file), line=int(w.line), point=f"{w.phase} #{w.point}", field="instruments",
            code="low-tur"))
    rule = str(pts["decision_rule"].iloc[0]) if "decision_rule" in pts.columns else "simple"
    if rule != "simple":
        limit = pd.to_numeric(pts["acceptance_limit"], errors="coerce").fillna(0.0)
        for w in worst_per_file(shown[(limit <= 0.0) & pts["U"].notna()], "line").itertuples():
            findings.append(warning(
                f"rule '{rule}': the acceptance zone is empty at {w.n_points} point(s) (U ±{w.U:.3g} against MPE "
                f"±{w.mpe:.3g} {w.output_unit}): no point can pass with this rig", file=str(w.source_file),
                line=int(w.line), point=f"{w.phase} #{w.point}", field="instruments", code="empty-acceptance-zone"))
    return findings


@hookimpl
@needs("error", "mpe", "acceptance_limit")
def ll_judge(ctx: RunContext) -> list[Finding]:
    return conformity(ctx)
