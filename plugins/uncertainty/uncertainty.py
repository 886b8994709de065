"""Stage 4, measurement uncertainty: a GUM budget for every point from the rig actually used.

Adds ``u``, ``U``, ``k`` and ``nu_eff`` (output units) to the point table and keeps every
component in ``ctx.stash[keys.BUDGET]`` (exported as ``budget.csv``, shown on each test page).
The components and formulas are in :mod:`loopledger.plugins.uncertainty.budget`.

A point whose budget lacks a main term (no meter range holding the reading, no source
specification, a shunt without tolerance) gets no U: a warning under the ``simple`` rule, an
error that makes the file invalid under a rule that needs U. A reading beyond the meter's
largest range of its kind (by more than the over-range allowance) gets no U and a warning.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.cells import each_value
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl
from loopledger.plugins.uncertainty import budget, montecarlo

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
    pts["u_method"] = "GUM"
    pts["mc_low"], pts["mc_high"] = np.nan, np.nan
    # where the first-order budget is not valid (a square root near zero, a cut-off): JCGM 101 Monte Carlo,
    # also for points whose only problem was the unbounded slope the first-order law cannot take
    open_ = problems.isna() | (problems == budget.UNEVALUATED)
    mc, quantiles = montecarlo.run(pts[open_], terms) if open_.any() else (pd.DataFrame(), pd.DataFrame())
    if len(mc):
        per.loc[mc.index, ["u", "U", "k"]] = mc[["u", "U", "k"]].to_numpy()
        per.loc[mc.index, "nu_eff"] = np.inf
        problems[mc.index] = None
        pts.loc[mc.index, "u_method"] = montecarlo.METHOD
        pts.loc[mc.index, "mc_low"], pts.loc[mc.index, "mc_high"] = mc["mc_low"], mc["mc_high"]
    if len(quantiles):  # each row's file goes with it, so a page's digest moves only with its own points
        quantiles.insert(0, "source_file", pts.loc[quantiles.index, "source_file"])
    ctx.stash[keys.MC_QUANTILES] = quantiles
    for col in POINT_COLUMNS:
        pts[col] = per[col]
    pts["reading_sensitivity"] = per["c_reading"]
    ctx.points = pts
    ctx.stash[keys.BUDGET] = budget_frame(pts, terms)
    exports = ctx.stash.setdefault(keys.POINT_EXPORTS, [])
    exports += [c for c in [*POINT_COLUMNS, "u_method", "mc_low", "mc_high"] if c not in exports]
    make = error if _rule_needs_u(ctx) else warning
    findings: list[Finding] = []
    lacking = pts.loc[problems.dropna().index].assign(problem=problems.dropna())
    counts = lacking.groupby(["source_file", "problem"]).size().rename("n_points")
    first = lacking.drop_duplicates(["source_file", "problem"]).join(counts, on=["source_file", "problem"])
    for r in first.itertuples():
        more = f" (and {r.n_points - 1} more point(s))" if r.n_points > 1 else ""
        severity = warning if r.problem in budget.WARN_ONLY else make
        findings.append(severity(f"no uncertainty: {r.problem}{more}", file=str(r.source_file), line=int(r.line),
                             point=f"{r.phase} #{r.point}", field="instruments", code="uncertainty-incomplete"))
    no_ambient = pts[(pts["method"] == "shunt") & pd.to_numeric(pts["ambient_c"], errors="coerce").isna()]
    for rel in pd.unique(no_ambient["source_file"]):
        findings.append(warning("ambient_c not recorded: the shunt's temperature-coefficient term is left out of "
                                "the uncertainty budget", file=str(rel), field="ambient_c", code="no-ambient"))
    no_cjc = pts[_needs_cjc(pts)]
    for rel in pd.unique(no_cjc["source_file"]):
        findings.append(warning("the cold-junction term is missing from the uncertainty budget: give cjc_u (e.g. "
                                "0.2 degC, or 0.5 degC rectangular) or a cjc_probe from instruments.yaml",
                                file=str(rel), field="cjc_u", code="no-cjc-u"))
    return findings


def _needs_cjc(pts: pd.DataFrame) -> pd.Series:
    """Points whose expected value depends on cjc_c but whose budget has nothing on how well it was known."""
    if "cjc_sensitivity" not in pts.columns:
        return pd.Series(False, index=pts.index)
    named = pd.Series(False, index=pts.index)
    for col in ("cjc_u", "cjc_probe"):
        if col in pts.columns:
            named |= pts[col].notna()
    return pd.to_numeric(pts["cjc_sensitivity"], errors="coerce").notna() & ~named


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


def fmt_all(values: Any, digits: int = 4) -> np.ndarray:
    """:func:`fmt` of each value (an object array)."""
    return each_value(values, lambda v: fmt(v, digits))


def phase_texts(values: Any) -> np.ndarray:
    """Each phase as shown on a page (``as_found`` -> ``as-found``)."""
    return each_value(values, lambda v: str(v).replace("_", "-"))


def texts(values: Any) -> np.ndarray:
    """``str`` of each value."""
    return each_value(values, str)


def rows_by(keys: pd.Series, columns: list[np.ndarray]) -> dict[str, list[list[str]]]:
    """Table rows (one per element of the ``columns``) grouped by ``keys``, keeping their order."""
    if not len(keys):
        return {}
    rows = np.column_stack(columns).tolist()
    groups = keys.groupby(keys.to_numpy(), sort=False).indices
    return {str(k): [rows[i] for i in idx] for k, idx in groups.items()}


def point_rows(pts: pd.DataFrame) -> list[np.ndarray]:
    """The columns of the per-point table, formatted: what the test page's points table does not show
    (there: MPE, acceptance limit, TUR and the decision, beside the error they judge)."""
    c = pts.reindex(columns=["phase", "point", "u", "k", "nu_eff", "U", "u_method", "risk"])
    return [phase_texts(c["phase"]), texts(c["point"]), fmt_all(c["u"]), fmt_all(c["k"], 3), fmt_all(c["nu_eff"], 3),
            fmt_all(c["U"]), texts(c["u_method"].fillna("GUM")), each_value(c["risk"], percent)]


def budget_rows(frame: pd.DataFrame) -> list[np.ndarray]:
    """The columns of the budget table, formatted."""
    return [phase_texts(frame["phase"]), texts(frame["point"]), texts(frame["component"]),
            texts(frame["distribution"]), fmt_all(frame["half_width"]) + " " + texts(frame["unit"]),
            fmt_all(frame["divisor"]), fmt_all(frame["sensitivity"]), fmt_all(frame["contribution"]),
            fmt_all(frame["dof"], 3)]


@hookimpl
def ll_uncertainty(ctx: RunContext) -> list[Finding]:
    return stage(ctx)


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    frame = ctx.stash.get(keys.BUDGET)
    if frame is None:
        return {}
    kept = frame[frame["test"].isin(set(ctx.points["test"]))] if not ctx.points.empty else frame.iloc[0:0]
    return {"budget": kept.sort_values(["test", "phase", "point"], kind="stable")}


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    if ctx.points.empty or "U" not in ctx.points.columns:
        return {}
    pts = ctx.points[ctx.points["test"].isin(tests)]
    if pts.empty:
        return {}
    first = pts.drop_duplicates("test")
    units = dict(zip(first["test"].astype(str), first["output_unit"].astype(str), strict=True))
    pts = pts.sort_values(["test", "phase", "point"], kind="stable")
    points = rows_by(pts["test"], point_rows(pts))
    frame = ctx.stash.get(keys.BUDGET)
    terms: dict[str, list[list[str]]] = {}
    if frame is not None:
        mine = frame[frame["test"].isin(tests)].sort_values(["test", "phase", "point"], kind="stable")
        terms = rows_by(mine["test"], budget_rows(mine))
    out: dict[str, list[Section]] = {}
    for test, rows in points.items():
        unit = units[test]
        out[test] = [Section(
            title=f"Uncertainty and specific risk per point (values in {unit})", kind="table",
            columns=["Phase", "#", "u", "k", "ν_eff", "U (95.45 %)", "U from", "Risk (true error outside ±MPE)"],
            rows=rows, order=20)]
        if frame is not None:
            out[test].append(Section(
                title=f"Uncertainty budget (contributions u_i in {unit})", kind="table",
                columns=["Phase", "#", "Component", "Distribution", "Half-width", "Divisor", "Sensitivity", "u_i",
                         "ν"], rows=terms.get(test, []), order=21, screen_only=True))
    return out
