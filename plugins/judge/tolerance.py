"""Stage 5, error and tolerance judgement, with the ``simple`` decision rule.

- error = measured − expected (output units) and in % of output span;
- MPE from the asset's ``accuracy``: a class index is ± that % of the output
  span (the fiducial value, as IEC 60688 uses it), or ``0.08 mA``, ``0.25 %span``,
  ``0.1 %rdg`` (of the expected output), or a sum of such terms;
- the decision rule named in loopledger.toml ``[decision] rule`` decides each
  point; ``simple`` is ILAC-G8:2019's simple acceptance (w = 0);
- a phase passes when every point is accepted; a test's verdict is ``pass``,
  ``adjusted`` (as-found failed, as-left passed), or ``fail``. Under a rule with a guard band
  (``guarded``, ``risk``) a point is accepted only inside the acceptance limit: the binary
  statement of ILAC-G8:2019 §4.2.2, so a conditional pass does not pass. Each point keeps its
  non-binary statement (§4.2.3). ``[decision] conditional = "pass"`` lets a site accept
  conditional passes knowingly: that is simple acceptance with the risk stated, and the
  terminal, the test page and the index say so. ``verdict_limit`` is the limit the verdict
  actually used (the global false-accept probability is worked out for it).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.contracts import DecisionRule, Section
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl

#: |error| within this fraction of the span above the limit still counts as on the limit
#: (floating-point noise only; readings are never this precise)
ROUNDING = 1e-9
#: ``[decision] conditional``: what a conditional pass counts as in a test's verdict
CONDITIONAL = ("fail", "pass")
#: the words the terminal, the test page and the index use when conditional passes are accepted
SIMPLE_WITH_RISK = ("conditional passes are accepted ([decision] conditional = \"pass\"): this is simple "
                    "acceptance (ILAC-G8:2019 §4.2.1) with the risk stated per point, not the guard-banded "
                    "rule's binary statement")


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


def conditional_accepted(ctx: RunContext) -> bool:
    """Whether ``[decision] conditional = "pass"`` is in force."""
    return str(ctx.section("decision").get("conditional", "fail")) == "pass"


def accepted(decision: pd.Series, conditional_pass: bool) -> pd.Series:
    """Whether each point counts as a pass in its test's verdict (ILAC-G8:2019 §4.2.2 binary statement:
    only ``pass``; with ``conditional_pass`` a conditional pass too)."""
    return decision.isin(("pass", "conditional-pass") if conditional_pass else ("pass",))


def acceptance_limits(rule: str, mpe: Any, U: Any, u: Any = None, nu_eff: Any = None,
                      risk_target: float | None = None, conditional_pass: bool = False) -> np.ndarray:
    """The acceptance limit (±, output units) a verdict uses under ``rule``, for arrays of MPE and U.

    ``simple``: MPE. ``guarded``: MPE − U (0 where U ≥ MPE: nothing can pass). ``risk``: the |error|
    whose specific risk equals ``risk_target`` (JCGM 106; scaled and shifted t at ``nu_eff`` where it is
    finite), from u (U/2 if not given); 0 where no acceptance zone exists. With ``conditional_pass`` the
    verdict accepts up to the MPE under every rule. For the test sheet's pass windows, among others.
    """
    m = np.asarray(mpe, dtype=float)
    big_u = np.broadcast_to(np.asarray(U, dtype=float), m.shape)
    if rule == "simple" or conditional_pass:
        return m.copy()
    if rule == "guarded":
        return np.clip(m - big_u, 0.0, None)
    if rule == "risk":
        from loopledger.plugins.judge.decision_rules import DEFAULT_RISK_TARGET, risk_limits

        small_u = big_u / 2.0 if u is None else np.broadcast_to(np.asarray(u, dtype=float), m.shape)
        nu = np.full(m.shape, np.inf) if nu_eff is None else np.broadcast_to(np.asarray(nu_eff, dtype=float),
                                                                              m.shape)
        accept, _ = risk_limits(small_u, m, DEFAULT_RISK_TARGET if risk_target is None else risk_target, nu)
        return np.where(np.isnan(accept), 0.0, accept)
    raise ValueError(f"no acceptance limit known for rule '{rule}'")


def phase_verdicts(points: pd.DataFrame, conditional_pass: bool = False) -> pd.DataFrame:
    """One row per test: as_found, as_left (pass | fail | ''), verdict, adjusted.

    A phase passes when every point is accepted (:func:`accepted`)."""
    failing = ~accepted(points["decision"], conditional_pass)
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
    lenient = conditional_accepted(ctx) and rule.name != "simple"
    # the limit the verdict used: the acceptance limit, or the MPE when conditional passes are accepted
    pts["verdict_limit"] = pts["mpe"] if lenient else pts["acceptance_limit"]
    pts["accepted"] = accepted(pts["decision"], lenient)
    ctx.stash[keys.DECISION_NOTE] = SIMPLE_WITH_RISK if lenient else ""
    ctx.points = pts
    verdicts = phase_verdicts(pts, lenient) if len(pts) else pd.DataFrame(
        columns=["as_found", "as_left", "adjusted", "verdict"])
    tests = ctx.tests.set_index("test", drop=False)
    for col in ("as_found", "as_left", "adjusted", "verdict"):
        tests[col] = verdicts[col].reindex(tests.index)
    tests.loc[~tests["valid"].astype(bool), "verdict"] = "invalid"
    tests["decision_rule"] = rule.name
    tests["conditional_accepted"] = lenient
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


def _statement(rule: str, lenient: bool) -> str:
    if rule == "simple":
        return "simple acceptance (ILAC-G8:2019 §4.2.1): a point passes when |error| ≤ MPE"
    if lenient:
        return SIMPLE_WITH_RISK[0].upper() + SIMPLE_WITH_RISK[1:]
    return (f"binary statement with a guard band (ILAC-G8:2019 §4.2.2, rule '{rule}'): the test passes only "
            "if every point is inside the acceptance limit; a conditional pass does not pass")


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    if "conditional_accepted" not in ctx.tests.columns or "decision_rule" not in ctx.tests.columns:
        return {}
    mine = ctx.tests[ctx.tests["test"].isin(tests)].drop_duplicates("test", keep="last")
    return {str(t): [Section(title="How the verdict was decided", kind="text", order=19,
                             text=_statement(str(rule), bool(lenient)))]
            for t, rule, lenient in zip(mine["test"], mine["decision_rule"], mine["conditional_accepted"],
                                        strict=True) if rule == rule}


@hookimpl
def ll_fleet_sections(ctx: RunContext) -> list[Section]:
    if ctx.tests.empty or "conditional_accepted" not in ctx.tests.columns:
        return []
    rule = str(ctx.tests["decision_rule"].iloc[0])
    return [Section(title="How verdicts are decided", kind="text", order=5,
                    text=_statement(rule, bool(ctx.tests["conditional_accepted"].any())))]


@hookimpl
def ll_configure(config: dict[str, Any]) -> list[Finding]:
    decision = config.get("decision", {})
    if not isinstance(decision, dict) or not isinstance(decision.get("rule", "simple"), str):
        return [error("[decision] rule must be a name such as \"simple\"", file="loopledger.toml",
                      field="decision.rule")]
    if "conditional" in decision and decision["conditional"] not in CONDITIONAL:
        return [error(f"[decision] conditional must be \"fail\" (the default: a conditional pass fails the test, "
                      f"ILAC-G8:2019 §4.2.2) or \"pass\" (simple acceptance with the risk stated), got "
                      f"{decision['conditional']!r}", file="loopledger.toml", field="decision.conditional")]
    return []


@hookimpl
def ll_config_keys() -> dict[str, list[str]]:
    return {"decision": ["conditional"]}
