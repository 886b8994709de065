"""Stage 4, measurement uncertainty: a GUM budget for every point from the rig actually used.

Adds ``u``, ``U``, ``k`` and ``nu_eff`` (output units) to the point table and keeps every
component in ``ctx.extras["budget"]`` (exported as ``budget.csv``, shown on each test page).
The components and formulas are in :mod:`loopledger.plugins.budget`.

A point whose budget lacks a main term (no meter range holding the reading, no source
specification, a shunt without tolerance) gets no U: a warning under the ``simple`` rule, an
error that makes the file invalid under a rule that needs U.
"""

from __future__ import annotations

import math

import pandas as pd
from loopledger.context import RunContext, rows_of
from loopledger.contracts import Section, each
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl
from loopledger.plugins import budget

POINT_COLUMNS = ["u", "U", "k", "nu_eff"]
BUDGET_COLUMNS = ["test", "phase", "point", "component", "distribution", "half_width", "unit", "divisor",
                  "sensitivity", "contribution", "dof"]


def _rule_needs_u(ctx: RunContext) -> bool:
    rule = ctx.decision_rules.get(str(ctx.section("decision").get("rule", "simple")))
    return rule is not None and bool({"u", "U"} & set(rule.needs))


def budget_frame(pts: pd.DataFrame, terms: pd.DataFrame) -> pd.DataFrame:
    """The long budget table with each row's test, phase and point."""
    keys = pts.loc[terms["row"], ["test", "phase", "point"]].reset_index(drop=True)
    frame = pd.concat([keys, terms.drop(columns=["row"]).reset_index(drop=True)], axis=1)
    return frame[BUDGET_COLUMNS]


def stage(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    terms, per, problems = budget.compute(ctx, pts)
    for col in POINT_COLUMNS:
        pts[col] = per[col]
    pts["reading_sensitivity"] = per["c_reading"]
    ctx.points = pts
    ctx.extras["budget"] = budget_frame(pts, terms)
    exports = ctx.extras.setdefault("point_exports", [])
    exports += [c for c in POINT_COLUMNS if c not in exports]
    make = error if _rule_needs_u(ctx) else warning
    findings: list[Finding] = []
    lacking = pts.loc[problems.dropna().index].assign(problem=problems.dropna())
    counts = lacking.groupby(["source_file", "problem"]).size().rename("n_points")
    first = lacking.drop_duplicates(["source_file", "problem"]).join(counts, on=["source_file", "problem"])
    for r in first.itertuples():
        more = f" (and {r.n_points - 1} more point(s))" if r.n_points > 1 else ""
        severity = warning if r.problem == budget.UNEVALUATED else make
        findings.append(severity(f"no uncertainty: {r.problem}{more}", file=str(r.source_file), line=int(r.line),
                             point=f"{r.phase} #{r.point}", field="instruments", code="uncertainty-incomplete"))
    no_ambient = pts[(pts["method"] == "shunt") & pd.to_numeric(pts["ambient_c"], errors="coerce").isna()]
    for rel in pd.unique(no_ambient["source_file"]):
        findings.append(warning("ambient_c not recorded: the shunt's temperature-coefficient term is left out of "
                                "the uncertainty budget", file=str(rel), field="ambient_c", code="no-ambient"))
    return findings


def fmt(value: object, digits: int = 4) -> str:
    """A number for a page or the terminal: significant digits, ∞, or a dash."""
    if value is None:
        return "—"
    try:
        number = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return str(value)
    if math.isnan(number):
        return "—"
    if math.isinf(number):
        return "∞"
    return f"{number:.{digits}g}"


def percent(p: object) -> str:
    """A probability as a percentage for people: '—', '< 0.001 %' or three significant digits."""
    if p is None or pd.isna(p):  # type: ignore[arg-type]
        return "—"
    value = 100.0 * float(p)  # type: ignore[arg-type]
    return "< 0.001 %" if value < 0.001 else f"{value:.3g} %"


def point_rows(pts: pd.DataFrame) -> list[list[str]]:
    cols = ["phase", "point", "u", "k", "nu_eff", "U", "mpe", "tur", "risk", "acceptance_limit", "decision"]
    rows = []
    for r in pts.reindex(columns=cols).itertuples(index=False):
        rows.append([str(r.phase).replace("_", "-"), str(r.point), fmt(r.u), fmt(r.k, 3), fmt(r.nu_eff, 3), fmt(r.U),
                     fmt(r.mpe), fmt(r.tur, 3), percent(r.risk),
                     fmt(r.acceptance_limit), str(r.decision)])
    return rows


def budget_rows(frame: pd.DataFrame) -> list[list[str]]:
    return [[str(r.phase).replace("_", "-"), str(r.point), str(r.component), str(r.distribution),
             f"{fmt(r.half_width)} {r.unit}", fmt(r.divisor), fmt(r.sensitivity), fmt(r.contribution), fmt(r.dof, 3)]
            for r in frame.itertuples(index=False)]


@hookimpl
def ll_uncertainty(ctx: RunContext) -> list[Finding]:
    return stage(ctx)


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    frame = ctx.extras.get("budget")
    if frame is None:
        return {}
    kept = frame[frame["test"].isin(set(ctx.points["test"]))] if not ctx.points.empty else frame.iloc[0:0]
    return {"budget": kept.sort_values(["test", "phase", "point"], kind="stable")}


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    return each(tests, lambda test: test_sections(ctx, test))


def test_sections(ctx: RunContext, test: str) -> list[Section]:
    if ctx.points.empty or "U" not in ctx.points.columns:
        return []
    pts = rows_of(ctx.points, "test", test).sort_values(["phase", "point"])
    if pts.empty:
        return []
    unit = str(pts["output_unit"].iloc[0])
    rule = str(pts["decision_rule"].iloc[0]) if "decision_rule" in pts else ""
    sections = [Section(
        title=f"Uncertainty and conformity per point (rule: {rule}; values in {unit})", kind="table",
        columns=["Phase", "#", "u", "k", "ν_eff", "U (95.45 %)", "MPE ±", "TUR", "Risk", "Acceptance limit",
                 "Decision"], rows=point_rows(pts), order=20)]
    frame = ctx.extras.get("budget")
    if frame is not None:
        mine = rows_of(frame, "test", test).sort_values(["phase", "point"], kind="stable")
        sections.append(Section(
            title=f"Uncertainty budget (contributions u_i in {unit})", kind="table",
            columns=["Phase", "#", "Component", "Distribution", "Half-width", "Divisor", "Sensitivity", "u_i", "ν"],
            rows=budget_rows(mine), order=21))
    return sections
