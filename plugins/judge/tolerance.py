"""Stage 5, error and tolerance judgement, with the ``simple`` decision rule.

- error = measured − expected (output units) and in % of output span;
- MPE from the asset's ``accuracy``: a class index is ± that % of the output
  span (the fiducial value, as IEC 60688 uses it), or ``0.08 mA``, ``0.25 %span``,
  ``0.1 %rdg`` (of the expected output), or a sum of such terms;
- the decision rule named in loopledger.toml ``[decision] rule`` decides each
  point; ``simple`` is ILAC-G8:2019's simple acceptance (w = 0);
- a phase passes when none of its points fails; a test's verdict is ``pass``,
  ``adjusted`` (as-found failed, as-left passed), or ``fail``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.contracts import DecisionRule
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl

#: |error| within this fraction of the span above the limit still counts as on the limit
#: (floating-point noise only; readings are never this precise)
ROUNDING = 1e-9
FAILING = ("fail", "conditional-fail")


class Simple(DecisionRule):
    name = "simple"
    description = "simple acceptance (ILAC-G8:2019 §4.2.1): pass when |error| ≤ MPE"

    def decide(self, points: pd.DataFrame, ctx: RunContext) -> pd.DataFrame:
        slack = ROUNDING * points["span"].abs()
        ok = points["error"].abs() <= points["mpe"] + slack
        return pd.DataFrame({"decision": np.where(ok, "pass", "fail"), "acceptance_limit": points["mpe"]},
                            index=points.index)


def mpe(points: pd.DataFrame) -> tuple[pd.Series, list[Finding]]:
    """Maximum permissible error in output units, per point."""
    out = pd.Series(np.nan, index=points.index, dtype=float)
    findings: list[Finding] = []
    for (text, unit), idx in points.groupby(["accuracy", "output_unit"], sort=False).groups.items():
        rows = points.loc[idx]
        try:
            spec = q.parse_spec(str(text))
            out[idx] = spec.half_width(rows["expected"], span=rows["span"].abs(), unit=str(unit))
        except ValueError as exc:  # a safety net (the registry refuses such rows): the error goes on the
            # result files, which are then invalid rather than failed against a limit that is not there
            for rel, asset in rows[["source_file", "asset"]].drop_duplicates().itertuples(index=False):
                findings.append(error(f"asset {asset}: accuracy '{text}' gives no limit: {exc}", file=rel,
                                      field="accuracy"))
    return out, findings


def phase_verdicts(points: pd.DataFrame) -> pd.DataFrame:
    """One row per test: as_found, as_left (pass | fail | ''), verdict, adjusted."""
    failing = points["decision"].isin(FAILING)
    by = failing.groupby([points["test"], points["phase"]]).any().unstack("phase")
    table = pd.DataFrame(index=by.index)
    for phase in ("as_found", "as_left"):
        col = by[phase] if phase in by else pd.Series(np.nan, index=by.index)
        table[phase] = col.map({True: "fail", False: "pass"}).fillna("")
    final = table["as_left"].where(table["as_left"] != "", table["as_found"])
    table["adjusted"] = table["as_left"] != ""
    table["verdict"] = np.where(final == "fail", "fail",
                                np.where((table["as_found"] == "fail") & (table["as_left"] == "pass"),
                                         "adjusted", "pass"))
    return table


def judge(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    pts["span"] = pts["output_max"].astype(float) - pts["output_min"].astype(float)
    pts["error"] = pts["measured"] - pts["expected"]
    pts["error_pct_span"] = pts["error"] / pts["span"] * 100.0
    pts["mpe"], findings = mpe(pts)
    rule = _rule(ctx)
    missing = [c for c in rule.needs if c not in pts.columns]
    if missing:
        raise LookupError(f"decision rule '{rule.name}' needs {', '.join(missing)}, which no stage computed")
    decided = rule.decide(pts, ctx) if len(pts) else pd.DataFrame(columns=["decision", "acceptance_limit"])
    pts["decision"] = decided["decision"]
    pts["acceptance_limit"] = decided["acceptance_limit"]
    pts["decision_rule"] = rule.name
    ctx.points = pts
    verdicts = phase_verdicts(pts) if len(pts) else pd.DataFrame(
        columns=["as_found", "as_left", "adjusted", "verdict"])
    tests = ctx.tests.set_index("test", drop=False)
    for col in ("as_found", "as_left", "adjusted", "verdict"):
        tests[col] = verdicts[col].reindex(tests.index)
    tests.loc[~tests["valid"].astype(bool), "verdict"] = "invalid"
    tests["decision_rule"] = rule.name
    ctx.tests = tests.reset_index(drop=True)
    return findings


def _rule(ctx: RunContext) -> DecisionRule:
    name = str(ctx.section("decision").get("rule", "simple"))
    return ctx.decision_rules[name]  # the runner refused unknown rules at configuration


@hookimpl
def ll_decision_rules() -> list[DecisionRule]:
    return [Simple()]


@hookimpl
def ll_judge(ctx: RunContext) -> list[Finding]:
    return judge(ctx)


@hookimpl
def ll_configure(config: dict[str, Any]) -> list[Finding]:
    decision = config.get("decision", {})
    if not isinstance(decision, dict) or not isinstance(decision.get("rule", "simple"), str):
        return [error("[decision] rule must be a name such as \"simple\"", file="loopledger.toml",
                      field="decision.rule")]
    return []
