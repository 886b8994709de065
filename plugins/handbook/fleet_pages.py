"""Data of the pages about the whole fleet: index, overdue, failures, instruments (used by :mod:`.build`).

Every function here turns the run context into plain, JSON-able dicts and lists
(str, int, float, bool, None) so that a page's inputs can be hashed for the
incremental build and handed to a worker process. Columns that other stages
add (uncertainty, burden, history) are used when present; when a column or a
``ctx.extras`` entry is missing the page says so or leaves the block out.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.cache.store import REGISTRY_FILES
from loopledger.context import RunContext
from loopledger.findings import by_file
from loopledger.plugins.handbook import cautions
from loopledger.plugins.handbook.values import _col, _dates, grouped, page_name, page_names, plain, records
from loopledger.plugins.history.traceability import cal_status

CAUTIONS = cautions.ALL  # the footer of the fleet pages: every caution the handbook gives

#: roles of the reference instruments named in a result file
ROLES = ("source", "meter", "shunt")
SOON_DAYS = 90  # "due soon" on the index: common practice for a planning look-ahead
PREDICT_DAYS = 365  # a predicted exit from tolerance within a year (or before the next due date) is "soon"


# ---------------------------------------------------------------------------------------------
# tests and instruments


def reference_flags(ctx: RunContext) -> pd.DataFrame:
    """Per test: reference_out_of_cal (bool) and reference_issues (text), as the traceability stage judged
    them (both False / empty where it has not run: the handbook does not judge calibration itself)."""
    tests = ctx.tests.set_index("test")
    return pd.DataFrame({"reference_out_of_cal": _col(tests, "reference_out_of_cal", False).fillna(False).astype(bool),
                         "reference_issues": _col(tests, "reference_issues", "").fillna("").astype(str)})


def test_table(ctx: RunContext) -> pd.DataFrame:
    """ctx.tests with page names and reference flags."""
    tests = ctx.tests.copy()
    if tests.empty:
        return tests.assign(page=[], asset_page=[], reference_out_of_cal=[], reference_issues=[])
    tests["page"] = page_names(tests["test"])
    registered = dict(zip(ctx.assets.index, page_names(ctx.assets.index), strict=True))
    tests["asset_page"] = tests["asset"].map(lambda a: registered.get(a, page_name(a)) if isinstance(a, str) and a
                                             else "")
    flags = reference_flags(ctx)
    tests["reference_out_of_cal"] = flags["reference_out_of_cal"].reindex(tests["test"]).to_numpy()
    tests["reference_issues"] = flags["reference_issues"].reindex(tests["test"]).to_numpy()
    return tests


# ---------------------------------------------------------------------------------------------
# assets

def asset_table(ctx: RunContext, tests: pd.DataFrame) -> pd.DataFrame:
    """One row per asset: registry columns, latest test, verdict, next due, overdue, prediction."""
    assets = ctx.assets.copy()
    assets["page"] = page_names(assets.index)
    valid = tests[tests["valid"].astype(bool)] if len(tests) else tests
    latest = valid.sort_values(["date", "test"]).groupby("asset").tail(1).set_index("asset") if len(valid) else \
        pd.DataFrame(columns=["test", "date", "verdict", "page"])
    assets["last_test"] = latest["test"].reindex(assets.index)
    assets["last_page"] = latest["page"].reindex(assets.index)
    assets["last_date"] = latest["date"].reindex(assets.index)
    assets["verdict"] = latest["verdict"].reindex(assets.index).fillna("untested")
    assets["n_tests"] = valid.groupby("asset").size().reindex(assets.index).fillna(0).astype(int) \
        if len(valid) else 0
    invalid = tests[~tests["valid"].astype(bool)] if len(tests) else tests
    assets["n_invalid"] = invalid.groupby("asset").size().reindex(assets.index).fillna(0).astype(int) \
        if len(invalid) else 0  # result files of the asset that could not be judged
    summary = ctx.stash.get(keys.ASSETS_SUMMARY)  # the intervals stage's due dates; none where it has not run
    if isinstance(summary, pd.DataFrame) and "asset" in summary.columns:
        summary = summary.set_index("asset")
    known = isinstance(summary, pd.DataFrame) and "next_due" in summary.columns
    assets["next_due"] = _dates(summary["next_due"].reindex(assets.index) if known
                                else pd.Series(None, index=assets.index, dtype=object))
    as_of = pd.Timestamp(ctx.as_of)
    assets["overdue"] = summary["overdue"].reindex(assets.index).fillna(False).astype(bool) \
        if isinstance(summary, pd.DataFrame) and "overdue" in summary.columns else False
    assets["days_overdue"] = (as_of - assets["next_due"]).dt.days.where(assets["overdue"])
    assets["due_soon"] = ~assets["overdue"] & (assets["next_due"] - as_of).dt.days.between(0, SOON_DAYS)
    pred = pd.Series(None, index=assets.index, dtype=object)
    if isinstance(summary, pd.DataFrame) and "predicted_out_of_tolerance" in summary.columns:
        pred = summary["predicted_out_of_tolerance"].reindex(assets.index)
    assets["predicted"] = [_prediction(v) for v in pred]
    when = _dates(assets["predicted"].where(assets["predicted"] != "yes"))
    before_due = summary["predicted_before_due"].reindex(assets.index).fillna(False).astype(bool) \
        if isinstance(summary, pd.DataFrame) and "predicted_before_due" in summary.columns else False
    assets["predicted_soon"] = (assets["predicted"] == "yes") | before_due | (
        when.notna() & (when <= as_of + pd.Timedelta(days=PREDICT_DAYS)))
    for col in ("drift_pct_span_per_year", "recommended_interval_months"):
        assets[col] = summary[col].reindex(assets.index) if isinstance(summary, pd.DataFrame) and \
            col in summary.columns else np.nan
    last_flag = tests.set_index("test")["reference_out_of_cal"] if len(tests) else pd.Series(dtype=bool)
    assets["last_ref_out"] = assets["last_test"].map(last_flag).eq(True)  # no test (NaN): not flagged
    assets["next_due"] = assets["next_due"].map(plain)
    return assets


def _prediction(value: Any) -> str:
    """Issue 5's ``predicted_out_of_tolerance``: a flag or a date; '' when not predicted."""
    if value is None or (not isinstance(value, str) and pd.isna(value)):
        return ""
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else ""
    if isinstance(value, (pd.Timestamp, dt.date)):
        return plain(value)
    text = str(value).strip()
    return "" if text.lower() in ("", "false", "0", "no", "nan", "nat") else text


def counts(assets: pd.DataFrame) -> dict[str, int]:
    verdicts = assets["verdict"].value_counts()
    return {"pass": int(verdicts.get("pass", 0)), "fail": int(verdicts.get("fail", 0)),
            "adjusted": int(verdicts.get("adjusted", 0)), "untested": int(verdicts.get("untested", 0)),
            "overdue": int(assets["overdue"].sum()), "total": len(assets)}


ASSET_COLS = ["asset", "page", "description", "site", "area", "signal", "verdict", "last_date", "last_page",
              "next_due", "overdue", "days_overdue", "due_soon", "predicted", "predicted_soon", "last_ref_out",
              "n_tests", "n_invalid"]
TEST_COLS = ["test", "page", "asset", "asset_page", "date", "technician", "verdict", "as_found", "as_left",
             "source_file", "reference_out_of_cal", "reference_issues", "valid"]


def index_data(ctx: RunContext, assets: pd.DataFrame, tests: pd.DataFrame) -> dict[str, Any]:
    groups = []
    filled = assets.assign(site=assets["site"].fillna("").astype(str), area=assets["area"].fillna("").astype(str)) \
        if len(assets) else assets.assign(site=[], area=[])
    for (site, area), rows in filled.groupby(["site", "area"], sort=True):
        groups.append({"site": site, "area": area, "assets": records(rows.sort_values("asset"), ASSET_COLS)})
    failed = assets[assets["verdict"] == "fail"].sort_values("asset")
    overdue = assets[assets["overdue"]].sort_values(["days_overdue", "asset"], ascending=[False, True])
    predicted = assets[assets["predicted_soon"]].sort_values("asset")
    ref = tests[tests["reference_out_of_cal"].astype(bool)].sort_values(["date", "test"], ascending=False) \
        if len(tests) else tests
    invalid = tests[~tests["valid"].astype(bool)] if len(tests) else tests
    return {"counts": counts(assets), "groups": groups,
            "action": {"failed": records(failed, ASSET_COLS), "overdue": records(overdue, ASSET_COLS),
                       "predicted": records(predicted, ASSET_COLS),
                       "reference": records(ref, TEST_COLS), "invalid": [
                           {**r, "problem": _first_error(ctx, r["source_file"])} for r in records(invalid, TEST_COLS)],
                       "registers": [f.format() for f in ctx.findings if f.file in REGISTRY_FILES],
                       "found_out": _found_out(ctx)},
            "history_available": isinstance(ctx.stash.get(keys.ASSETS_SUMMARY), pd.DataFrame)}


def failure_events(ctx: RunContext, tests: pd.DataFrame) -> dict[str, Any]:
    """The failures page's list of every as-found failure, as the history stage found them (``events`` is
    None where that stage has not run: the page says so rather than leave the list out silently)."""
    events = ctx.stash.get(keys.AS_FOUND_FAILURES)
    if not isinstance(events, pd.DataFrame):
        return {"events": None}
    pages = tests.set_index("test")["page"] if len(tests) else pd.Series(dtype=object)
    shown = events.assign(page=events["test"].map(pages).fillna(""),
                          asset_page=events["asset"].map(lambda a: page_name(a) if a in ctx.assets.index else ""))
    return {"events": records(shown, ["date", "asset", "asset_page", "test", "page", "worst", "action", "as_left",
                                      "put_right"])}


def changes_data(ctx: RunContext, tests: pd.DataFrame) -> dict[str, Any]:
    """The changes page: every verdict changed without its file changing, as the history stage kept them."""
    table = ctx.stash.get(keys.VERDICT_CHANGES)
    if not isinstance(table, pd.DataFrame) or table.empty:
        return {"changes": []}  # the same page whether or not an earlier run was there (a rebuild equals a cold run)
    pages = tests.set_index("test")["page"] if len(tests) else pd.Series(dtype=object)
    shown = table.sort_values(["run_date", "date", "test"], ascending=[False, False, True]).assign(
        page=table["test"].map(pages).fillna(""),
        asset_page=table["asset"].map(lambda a: page_name(a) if a in ctx.assets.index else ""))
    return {"changes": records(shown, [*shown.columns])}


def _certificates(ctx: RunContext, ident: str) -> list[dict[str, Any]]:
    """An instrument's calibrations on record, oldest first, as instruments.yaml gives them."""
    cals = ctx.calibrations
    if cals.empty or "instrument" not in cals.columns:
        return []
    mine = cals[cals["instrument"] == ident]
    shown = mine.assign(date=_dates(mine["date"]).map(plain), due=_dates(mine["due"]).map(plain))
    return records(shown, ["date", "due", "certificate", "as_found", "remarks"])


def _found_out(ctx: RunContext) -> list[dict[str, Any]]:
    """The references a calibration found out of tolerance, as the traceability stage listed them."""
    table = ctx.stash.get(keys.REFERENCES_FOUND_OUT)
    return records(table, list(table.columns)) if isinstance(table, pd.DataFrame) and len(table) else []


# ---------------------------------------------------------------------------------------------
# charts' data

CHART_COLS = ["phase", "input_pct", "error_pct", "mpe_pct", "accept_pct", "U_pct", "characteristic"]


def chart_columns(points: pd.DataFrame) -> pd.DataFrame:
    """The error chart's columns for every point at once, all in % of span, and the asset's
    ``characteristic`` (``sqrt`` puts % of flow on the chart's x axis)."""
    if points.empty:
        return pd.DataFrame(columns=CHART_COLS)
    span = points["span"].abs().replace(0, np.nan)
    return pd.DataFrame({
        "phase": points["phase"], "input_pct": points["input_pct"], "error_pct": points["error_pct_span"],
        "mpe_pct": points["mpe"] / span * 100.0,
        "accept_pct": _col(points, "acceptance_limit") / span * 100.0,
        "U_pct": _col(points, "U") / span * 100.0,
        "characteristic": _col(points, "characteristic", None),
    }, index=points.index)


# ---------------------------------------------------------------------------------------------
# page contexts (the dicts the templates receive; also what the incremental build hashes)

POINT_COLS = ["phase", "point", "input", "input_pct", "reading_text", "expected", "measured", "output_unit",
              "error", "error_pct_span", "mpe", "acceptance_limit", "U", "k", "tur", "decision", "decision_rule",
              "ne43_band", "clipped", "line"]


def _first_error(ctx: RunContext, rel: Any) -> str:
    """The first error of a result file, with its line and field (what the terminal summary shows)."""
    first = next((f for f in findings_of(ctx, str(rel)) if f.severity == "error"), None)
    if first is None:
        return ""
    where = ", ".join(p for p in (f"line {first.line}" if first.line else "", first.point,
                                   f"field '{first.field}'" if first.field else "") if p)
    return first.message + (f" ({where})" if where else "")


def findings_of(ctx: RunContext, rel: str) -> list[Any]:
    """One file's findings, from an index built once per list of findings (pages are made per test)."""
    cached = ctx.stash.get(keys.FINDINGS_BY_FILE)
    if cached is None or cached[0] is not ctx.findings or cached[1] != len(ctx.findings):
        cached = (ctx.findings, len(ctx.findings), by_file(ctx.findings))
        ctx.stash[keys.FINDINGS_BY_FILE] = cached
    return list(cached[2].get(rel, []))


def instruments_data(ctx: RunContext, used: pd.DataFrame, tests: pd.DataFrame) -> dict[str, Any]:

    inst = ctx.instruments
    by_test = tests.set_index("test") if len(tests) else None
    joined = used.assign(**{c: used["test"].map(by_test[c]) if by_test is not None else None
                            for c in ("page", "asset", "verdict")})
    uses = grouped(joined, "instrument", ["date", "test"],
                   ["test", "page", "asset", "date", "role", "status", "out_of_cal", "verdict"], ascending=False)
    out = []
    for ident in sorted(set(inst.index.astype(str)) | set(used["instrument"])):
        info = inst.loc[ident] if ident in inst.index else pd.Series(dtype=object)
        rows = uses.get(ident, [])
        ranges = records(ctx.ranges[ctx.ranges["instrument"] == ident], ["range", "accuracy", "resolution", "burden"]) \
            if len(ctx.ranges) and "instrument" in ctx.ranges.columns else []
        out.append({"id": ident, "known": ident in inst.index, "kind": plain(info.get("kind")),
                    "description": plain(info.get("description")), "serial": plain(info.get("serial")),
                    "calibrated": plain(info.get("calibrated")), "due": plain(info.get("due")),
                    "spec": plain(info.get("accuracy")) or plain(info.get("tolerance")),
                    "resistance": plain(info.get("resistance")), "range": plain(info.get("range")),
                    "status_now": cal_status(info.get("calibrated"), info.get("due"), ctx.as_of)
                    if ident in inst.index else "not in instruments.yaml",
                    "ranges": ranges, "certificates": _certificates(ctx, ident), "tests": rows,
                    "n_out": sum(1 for r in rows if r["out_of_cal"])})
    return {"instruments": out}


# ---------------------------------------------------------------------------------------------
# the test sheet to take to site


