"""Page data for the handbook (not a plugin itself; :mod:`loopledger.plugins.handbook.handbook` uses it).

Every function here turns the run context into plain, JSON-able dicts and lists
(str, int, float, bool, None) so that a page's inputs can be hashed for the
incremental build and handed to a worker process. Columns that other stages
add (uncertainty, burden, history) are used when present; when a column or a
``ctx.extras`` entry is missing the page says so or leaves the block out.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import math
import re
from dataclasses import fields
from typing import Any

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.cache.store import REGISTRY_FILES
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import by_file
from loopledger.plugins.signals.expected_output import kind_message, wrong_kind

CAUTIONS = [
    "Never open-circuit the secondary of a current transformer that may carry primary current: "
    "short it at the test block before disconnecting anything.",
    "Isolate, lock out and prove dead before touching terminals; work under the site's permit-to-work "
    "and test-block procedures.",
    "Use instruments, leads and probes rated for the measurement category of the circuit.",
    "Injection testing is for competent, authorised people only. Local codes, the site's rules and licensed "
    "practice take precedence over anything in this handbook.",
]

#: the points a sheet plans when the asset has no earlier test (common practice: 0, 25, 50, 75, 100 %)
DEFAULT_POINTS = (0.0, 25.0, 50.0, 75.0, 100.0)
#: roles of the reference instruments named in a result file
ROLES = ("source", "meter", "shunt")
#: analysis columns (issue 3), in % of span, with their labels
ANALYSIS = [("zero_error_pct", "Zero error"), ("span_error_pct", "Span error"),
            ("nonlin_terminal_pct", "Non-linearity (terminal)"),
            ("nonlin_independent_pct", "Non-linearity (independent)"), ("hysteresis_pct", "Hysteresis"),
            ("nonrepeatability_pct", "Non-repeatability"), ("worst_after_trim_pct", "Worst error after trim")]
BURDEN = [("loop_ohm", "Loop resistance", "Ω"), ("limit_ohm", "Largest load the output drives", "Ω"),
          ("margin_pct", "Margin", "%"), ("burden_status", "Burden check", ""),
          ("fault_signature", "Fault signature", "")]
SOON_DAYS = 90  # "due soon" on the index: common practice for a planning look-ahead
PREDICT_DAYS = 365  # a predicted exit from tolerance within a year (or before the next due date) is "soon"

_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")


def page_name(ident: Any) -> str:
    """A file name that is safe on any file system and cannot leave its folder."""
    name = _UNSAFE.sub("_", str(ident)).strip("._") or "_"
    return name[:150]


def page_names(idents: Any) -> list[str]:
    """:func:`page_name` of each id, made unique: ids whose safe names coincide (``a/b`` and ``a_b``,
    two long ids cut to the same 150 characters, or ``TX-1a`` and ``TX-1A``, one file on a file system
    that ignores case, as Windows and macOS do by default) each get a short hash of the id itself, so no
    page is written over another wherever the handbook is copied. The same id always gets the same name,
    whatever else is listed that does not coincide with it."""
    idents = [str(i) for i in idents]
    names = [page_name(i) for i in idents]
    owners: dict[str, set[str]] = {}
    for ident, name in zip(idents, names, strict=True):
        owners.setdefault(name.casefold(), set()).add(ident)
    shared = {name for name, who in owners.items() if len(who) > 1}
    return [f"{name[:140]}-{hashlib.sha256(ident.encode('utf-8')).hexdigest()[:9]}" if name.casefold() in shared
            else name for ident, name in zip(idents, names, strict=True)]


def plain(value: Any) -> Any:
    """A JSON-able Python value: NaN/NaT -> None, numpy scalars -> Python, dates -> 'YYYY-MM-DD'."""
    if type(value) is str:
        return value
    if value is None or value is pd.NaT:
        return None
    if isinstance(value, (pd.Timestamp, dt.datetime)):
        return value.date().isoformat()
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        f = float(value)
        return None if math.isnan(f) or math.isinf(f) else f
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    return value if isinstance(value, (str, int)) else str(value)


def records(frame: pd.DataFrame, columns: list[str] | None = None) -> list[dict[str, Any]]:
    cols = [c for c in (columns or list(frame.columns)) if c in frame.columns]
    return [{c: plain(v) for c, v in zip(cols, row, strict=True)}
            for row in frame[cols].itertuples(index=False, name=None)]


_SECTION_FIELDS = [f.name for f in fields(Section) if f.name != "rows"]


def section_dict(s: Section) -> dict[str, Any]:
    """A :class:`Section` as a JSON-able dict (rows of pairs or of table cells; no deep copy)."""
    out = {name: plain(getattr(s, name)) for name in _SECTION_FIELDS}
    out["rows"] = [[plain(v) for v in row] if isinstance(row, (list, tuple)) else plain(row) for row in s.rows]
    return out


def sorted_sections(results: list[dict[str, list[Section]] | None]) -> dict[str, list[Section]]:
    """The answers of a batch page hook (one ``{id: sections}`` per plugin), as each page's blocks in
    page order."""
    merged: dict[str, list[Section]] = {}
    for found in results:
        for key, blocks in (found or {}).items():
            merged.setdefault(str(key), []).extend(blocks or [])
    return {key: sorted(blocks, key=lambda s: (s.order, s.title)) for key, blocks in merged.items()}


def merged_sections(results: list[dict[str, list[Section]] | None]) -> dict[str, list[dict[str, Any]]]:
    """:func:`sorted_sections` as page data (dicts)."""
    return {key: [section_dict(s) for s in blocks] for key, blocks in sorted_sections(results).items()}


def test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    return sorted_sections(ctx.pm.hook.ll_test_sections(ctx=ctx, tests=list(tests))) if len(tests) else {}


def asset_sections(ctx: RunContext, assets: list[str]) -> dict[str, list[Section]]:
    return sorted_sections(ctx.pm.hook.ll_asset_sections(ctx=ctx, assets=list(assets))) if len(assets) else {}


def fleet_sections(ctx: RunContext) -> list[Section]:
    """The index page's blocks about the whole fleet (``ll_fleet_sections``), in order."""
    found = [s for blocks in ctx.pm.hook.ll_fleet_sections(ctx=ctx) for s in blocks or []]
    return sorted(found, key=lambda s: (s.order, s.title))


def sheet_sections(ctx: RunContext, plans: dict[str, dict[str, Any]]) -> dict[str, list[dict[str, Any]]]:
    return merged_sections(ctx.pm.hook.ll_sheet_sections(ctx=ctx, plans=plans)) if plans else {}


def _col(frame: pd.DataFrame, name: str, default: Any = np.nan) -> pd.Series:
    return frame[name] if name in frame.columns else pd.Series(default, index=frame.index)


def _dates(values: pd.Series) -> pd.Series:
    return pd.to_datetime(values, errors="coerce", format="ISO8601")


# ---------------------------------------------------------------------------------------------
# tests and instruments

def cal_status(calibrated: Any, due: Any, on: Any) -> str:
    """Calibration status of a reference instrument on the date ``on``, in words."""
    on_ts, cal, due_ts = pd.to_datetime(on, errors="coerce"), pd.to_datetime(calibrated, errors="coerce"), \
        pd.to_datetime(due, errors="coerce")
    if pd.isna(due_ts):
        return "no calibration due date recorded"
    if pd.isna(on_ts):
        return f"due {due_ts.date().isoformat()}"
    if not pd.isna(cal) and on_ts < cal:
        return f"before the calibration on file ({cal.date().isoformat()}); the earlier certificate is not recorded"
    if on_ts > due_ts:
        return f"OUT OF CALIBRATION: due {due_ts.date().isoformat()}"
    return f"in calibration until {due_ts.date().isoformat()}"


def usage(ctx: RunContext) -> pd.DataFrame:
    """One row per (test, role) naming a reference instrument, with its status on the test date.

    The same words as :func:`cal_status`, computed over the whole table at once.
    """
    tests = ctx.tests
    roles = [r for r in ROLES if r in tests.columns]
    if tests.empty or not roles:
        return pd.DataFrame(columns=["test", "role", "instrument", "date", "status", "out_of_cal", "known"])
    long = tests.melt(id_vars=["test", "date"], value_vars=roles, var_name="role", value_name="instrument")
    long = long[long["instrument"].notna() & (long["instrument"].astype(str) != "")].copy()
    long["instrument"] = long["instrument"].astype(str)
    inst = ctx.instruments
    known = long["instrument"].isin(inst.index) if len(inst) else pd.Series(False, index=long.index)
    cal = pd.Series(_dates(_col(inst, "calibrated").reindex(long["instrument"])).to_numpy(), index=long.index)
    due = pd.Series(_dates(_col(inst, "due").reindex(long["instrument"])).to_numpy(), index=long.index)
    on = _dates(long["date"].astype(str))  # invalid tests: any value
    due_text, cal_text = due.dt.strftime("%Y-%m-%d"), cal.dt.strftime("%Y-%m-%d")
    early = cal.notna() & on.notna() & (on < cal)
    late = due.notna() & on.notna() & (on > due)
    long["known"] = known
    long["status"] = np.select(
        [~known, due.isna(), on.isna(), early, late],
        ["not in instruments.yaml", "no calibration due date recorded", "due " + due_text,
         "before the calibration on file (" + cal_text + "); the earlier certificate is not recorded",
         "OUT OF CALIBRATION: due " + due_text],
        default="in calibration until " + due_text)
    long["out_of_cal"] = (known & late & ~early).astype(bool)
    long["role_order"] = long["role"].map(ROLES.index)
    return long.sort_values(["test", "role_order"]).drop(columns="role_order").reset_index(drop=True)


def reference_flags(ctx: RunContext, used: pd.DataFrame) -> pd.DataFrame:
    """Per test: reference_out_of_cal (bool) and reference_issues (text).

    Issue 5's traceability stage fills these columns; where it has not run, the
    status of each instrument on the test date is judged here from instruments.yaml.
    """
    tests = ctx.tests.set_index("test")
    if "reference_out_of_cal" in tests.columns:
        return pd.DataFrame({"reference_out_of_cal": tests["reference_out_of_cal"].fillna(False).astype(bool),
                             "reference_issues": _col(tests, "reference_issues", "").fillna("").astype(str)})
    bad = used[used["out_of_cal"]]
    text = (bad["instrument"] + " (" + bad["role"] + "): " + bad["status"]).groupby(bad["test"]).agg("; ".join)
    flag = pd.Series(tests.index.isin(text.index), index=tests.index)
    return pd.DataFrame({"reference_out_of_cal": flag, "reference_issues": text.reindex(tests.index).fillna("")})


def test_table(ctx: RunContext, used: pd.DataFrame | None = None) -> pd.DataFrame:
    """ctx.tests with page names and reference flags."""
    tests = ctx.tests.copy()
    if tests.empty:
        return tests.assign(page=[], asset_page=[], reference_out_of_cal=[], reference_issues=[])
    tests["page"] = page_names(tests["test"])
    registered = dict(zip(ctx.assets.index, page_names(ctx.assets.index), strict=True))
    tests["asset_page"] = tests["asset"].map(lambda a: registered.get(a, page_name(a)) if isinstance(a, str) and a
                                             else "")
    flags = reference_flags(ctx, usage(ctx) if used is None else used)
    tests["reference_out_of_cal"] = flags["reference_out_of_cal"].reindex(tests["test"]).to_numpy()
    tests["reference_issues"] = flags["reference_issues"].reindex(tests["test"]).to_numpy()
    return tests


# ---------------------------------------------------------------------------------------------
# assets

def _add_months(date: Any, months: Any) -> Any:
    if pd.isna(date) or months is None or pd.isna(months):
        return pd.NaT
    return pd.Timestamp(date) + pd.DateOffset(months=int(months))


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
    summary = ctx.extras.get("assets_summary")
    if isinstance(summary, pd.DataFrame) and "next_due" in summary.columns:
        summary = summary.set_index("asset") if "asset" in summary.columns else summary
        assets["next_due"] = _dates(summary["next_due"].reindex(assets.index))
    else:
        assets["next_due"] = [_add_months(d, m) for d, m in
                              zip(_dates(assets["last_date"]), _col(assets, "interval_months"), strict=True)]
        assets["next_due"] = _dates(assets["next_due"])
    as_of = pd.Timestamp(ctx.as_of)
    if isinstance(summary, pd.DataFrame) and "overdue" in summary.columns:
        assets["overdue"] = summary["overdue"].reindex(assets.index).fillna(False).astype(bool)
    else:
        assets["overdue"] = assets["next_due"].notna() & (assets["next_due"] < as_of)
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
    assets["last_ref_out"] = assets["last_test"].map(last_flag).fillna(False).astype(bool)
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
                       "registers": [f.format() for f in ctx.findings if f.file in REGISTRY_FILES]},
            "history_available": isinstance(ctx.extras.get("assets_summary"), pd.DataFrame)}


# ---------------------------------------------------------------------------------------------
# charts' data

CHART_COLS = ["phase", "input_pct", "error_pct", "mpe_pct", "accept_pct", "U_pct"]


def chart_columns(points: pd.DataFrame) -> pd.DataFrame:
    """The error chart's columns for every point at once, all in % of span."""
    if points.empty:
        return pd.DataFrame(columns=CHART_COLS)
    span = points["span"].abs().replace(0, np.nan)
    return pd.DataFrame({
        "phase": points["phase"], "input_pct": points["input_pct"], "error_pct": points["error_pct_span"],
        "mpe_pct": points["mpe"] / span * 100.0,
        "accept_pct": _col(points, "acceptance_limit") / span * 100.0,
        "U_pct": _col(points, "U") / span * 100.0,
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
    cached = ctx.extras.get("_findings_by_file")
    if cached is None or cached[0] is not ctx.findings or cached[1] != len(ctx.findings):
        cached = (ctx.findings, len(ctx.findings), by_file(ctx.findings))
        ctx.extras["_findings_by_file"] = cached
    return list(cached[2].get(rel, []))


def instruments_data(ctx: RunContext, used: pd.DataFrame, tests: pd.DataFrame) -> dict[str, Any]:
    from loopledger.plugins.handbook.page_rows import grouped

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
                    "ranges": ranges, "tests": rows, "n_out": sum(1 for r in rows if r["out_of_cal"])})
    return {"instruments": out}


# ---------------------------------------------------------------------------------------------
# the test sheet to take to site

def default_plan(ctx: RunContext, asset: str, tests: pd.DataFrame) -> dict[str, Any]:
    """The rig of the asset's latest valid test (a sensible default for its next test)."""
    return default_plans(ctx, [asset], tests)[asset]


def default_plans(ctx: RunContext, assets: list[Any], tests: pd.DataFrame) -> dict[str, dict[str, Any]]:
    """Per asset, the rig of its latest valid test in ``tests`` (direct reading when it has none)."""
    plans: dict[str, dict[str, Any]] = {str(a): {"method": "direct", "shunt_ohm": None, "meter": None,
                                                 "connection": "standalone"}
             for a in assets}
    if not len(tests):
        return plans
    valid = tests[tests["asset"].isin(assets) & tests["valid"].astype(bool)]
    last = valid.sort_values(["date", "test"], kind="stable").groupby("asset", sort=False).tail(1)
    cols = {c: (last[c] if c in last.columns else pd.Series(None, index=last.index, dtype=object)).map(plain)
            for c in ("method", "meter", "connection", "shunt")}
    for i, asset in enumerate(last["asset"]):
        plan = plans[str(asset)]
        plan["method"] = cols["method"].iloc[i] or "direct"
        plan["meter"] = cols["meter"].iloc[i]
        plan["connection"] = cols["connection"].iloc[i] or "standalone"
        shunt = cols["shunt"].iloc[i]
        if shunt and shunt in ctx.instruments.index:
            plan["shunt_ohm"] = _ohms(ctx.instruments.loc[shunt].get("resistance"))
        if plan["method"] == "shunt" and plan["shunt_ohm"] is None:
            plan["method"] = "direct"
    return plans


def _ratio(text: Any) -> float | None:
    """``2000/1`` -> 2000.0 (a current transformer's ratio), None when blank or not a ratio."""
    match = re.fullmatch(r"\s*([\d.]+)\s*/\s*([\d.]+)\s*", str(text)) if isinstance(text, str) else None
    if not match or not float(match.group(2)):
        return None
    return float(match.group(1)) / float(match.group(2))


def _ohms(text: Any) -> float | None:
    if text is None or (not isinstance(text, str) and pd.isna(text)):
        return None
    try:
        return float(q.to_float(text, "ohm"))
    except (ValueError, TypeError):
        return None


def planned_points(ctx: RunContext, assets: list[str], points: pd.DataFrame | None = None) -> dict[str, list[float]]:
    """Per asset, the input points (% of input range) of its latest valid test, or 0/25/50/75/100 %."""
    pts = ctx.points if points is None else points
    out = {a: list(DEFAULT_POINTS) for a in assets}
    if len(pts) and "asset" in pts.columns:
        found = pts[(pts["phase"] == "as_found") & pts["asset"].isin(assets)]
        if len(found):
            last = found.sort_values(["date", "test"], kind="stable").groupby("asset", sort=False)["test"].last()
            mine = found[found["test"].to_numpy() == found["asset"].map(last).to_numpy()]
            pcts = mine["input_pct"].astype(float).round(6).dropna()
            for asset, values in pcts.groupby(mine.loc[pcts.index, "asset"], sort=False):
                if len(values):
                    out[str(asset)] = sorted(set(values.tolist()))
    return out


def _planned_frame(ctx: RunContext, plans: dict[str, dict[str, Any]], pcts: dict[str, list[float]]) -> pd.DataFrame:
    """One row per planned point of every sheet: the registry columns and an injected-input row."""
    names = [a for a in plans for _ in pcts[a]]
    values = [p for a in plans for p in pcts[a]]
    numbers = [i + 1 for a in plans for i in range(len(pcts[a]))]
    frame = ctx.assets.loc[names].reset_index(drop=True)
    frame["asset"] = names
    method = [plans[a].get("method") or "direct" for a in names]
    connection = [plans[a].get("connection") or "standalone" for a in names]
    return frame.assign(test="sheet", source_file="(planned)", line=0, phase="as_found", point=numbers,
                        input=[f"{p:g} %" for p in values], input_value=values, input_written_unit=q.PERCENT,
                        injection="secondary", method=method, connection=connection, direction=None,
                        reading=np.nan, reading_unit="", reading_text="", n_readings=0, date=ctx.as_of.isoformat())


def _evaluate_planned(ctx: RunContext, frame: pd.DataFrame) -> tuple[pd.DataFrame, dict[str, str]]:
    """Expected output of the planned rows, one signal type at a time; a note per asset that could not be."""
    notes: dict[str, str] = {}
    parts = []
    for signal, rows in frame.groupby(frame["signal"].astype(str), sort=False):
        handler = ctx.signal_types.get(signal)
        if handler is None:
            notes.update({a: f"no plugin handles signal '{signal}', so no expected values can be given"
                          for a in rows["asset"].unique()})
            continue
        wrong = wrong_kind(rows, handler)
        notes.update({a: kind_message(a, unit, handler) for a, unit in wrong.items()})
        rows = rows[~rows["asset"].astype(str).isin(wrong)]
        if rows.empty:
            continue
        try:  # a signal type from a site plugin may not expect planned points: the rest of the site must still build
            evaluated, _ = handler.evaluate(rows, ctx)
            parts.append(rows.assign(**{c: evaluated[c].to_numpy() for c in evaluated.columns}))
            continue
        except Exception:
            pass
        for _, one in rows.groupby("asset", sort=False):  # the batch failed: find which assets, one at a time
            try:
                evaluated, _ = handler.evaluate(one, ctx)
                parts.append(one.assign(**{c: evaluated[c].to_numpy() for c in evaluated.columns}))
            except Exception as exc:
                notes[str(one["asset"].iloc[0])] = (
                    f"the signal type '{signal}' could not work out the planned points "
                    f"({type(exc).__name__}: {exc}); plan them by hand")
    return (pd.concat(parts) if parts else frame.iloc[0:0]), notes


def sheet_data(ctx: RunContext, asset: str, plan: dict[str, Any], points: pd.DataFrame | None = None,
               sections: list[dict[str, Any]] | None = None) -> dict[str, Any]:
    """One asset's sheet (see :func:`sheets`)."""
    return sheets(ctx, {asset: plan}, points, None if sections is None else {asset: sections})[asset]


def sheets(ctx: RunContext, plans: dict[str, dict[str, Any]], points: pd.DataFrame | None = None,
           sections: dict[str, list[dict[str, Any]]] | None = None) -> dict[str, dict[str, Any]]:
    """Per asset in ``plans``: the planned points with expected output and the acceptance window of each,
    for the rule in force; ``sections`` are the plugins' blocks for each sheet (asked for here when not
    given). Worked out for all the sheets at once."""
    from loopledger.plugins.judge import tolerance

    sections = sheet_sections(ctx, plans) if sections is None else sections
    frame = _planned_frame(ctx, plans, planned_points(ctx, list(plans), points))
    frame, failed = _evaluate_planned(ctx, frame)
    notes: dict[str, list[str]] = {a: [] for a in plans}
    rule_name = str(ctx.section("decision").get("rule", "simple"))
    if len(frame):
        frame["span"] = frame["output_max"].astype(float) - frame["output_min"].astype(float)
        frame["mpe"], _ = tolerance.mpe(frame)
        frame["error"] = 0.0
        frame["accept"] = frame["mpe"]
        rule = ctx.decision_rules.get(rule_name)
        if rule is not None:
            missing = [c for c in rule.needs if c not in frame.columns]
            if missing:
                for a in plans:
                    notes[a].append(f"The rule '{rule_name}' needs {', '.join(missing)}, known only after the "
                                    "readings are taken; the window below is the MPE and a reading near its edge "
                                    "must be judged after the run.")
            else:
                try:
                    frame["accept"] = rule.decide(frame, ctx)["acceptance_limit"].to_numpy()
                except (KeyError, ValueError, TypeError) as exc:  # a rule that cannot judge a planned point
                    for a in plans:
                        notes[a].append(f"The rule '{rule_name}' could not give a window before the test ({exc}); "
                                        "the window shown is the MPE.")
    cols = ("input_value", "injected", "injected_unit", "expected", "accept", "mpe")
    lists = [frame[c].tolist() if c in frame.columns else [None] * len(frame) for c in cols]
    where = frame.groupby("asset", sort=False).indices if len(frame) else {}
    return {a: _sheet(ctx, a, plan, [tuple(col[i] for col in lists) for i in where[a]] if a in where else None,
                      failed.get(a), notes[a], rule_name, sections.get(a, []))
            for a, plan in plans.items()}


def _sheet(ctx: RunContext, asset: str, plan: dict[str, Any], points: list[tuple[Any, ...]] | None,
           failed: str | None, notes: list[str], rule_name: str, sections: list[dict[str, Any]]) -> dict[str, Any]:
    """One sheet from its planned ``points``: (input %, injected, injected unit, expected, window, MPE)."""
    reg = ctx.assets.loc[asset]
    if points is None or failed:
        return {"asset": {k: plain(v) for k, v in reg.items()}, "plan": plain(plan), "rows": [], "rule": rule_name,
                "unit": str(reg.get("output_unit") or ""), "ct_ratio": None, "sections": [],
                "notes": [failed or f"no plugin handles signal '{reg.get('signal')}', so no expected values "
                                    "can be given"]}
    notes = list(notes)
    meter = plan.get("meter")
    if meter and meter in ctx.instruments.index:
        status = cal_status(ctx.instruments.at[meter, "calibrated"] if "calibrated" in ctx.instruments else None,
                            ctx.instruments.at[meter, "due"] if "due" in ctx.instruments else None, ctx.as_of)
        if status.startswith("OUT OF"):
            notes.append(f"The planned meter {meter} is {status} on {ctx.as_of.isoformat()}: use an instrument in "
                         "calibration, or the readings cannot be relied on.")
    unit = str(reg["output_unit"])
    ohm = plan.get("shunt_ohm") if plan.get("method") == "shunt" else None
    rows = []
    to_amps = q.affine(unit, "A") if unit else None
    ratio = _ratio(reg.get("ct_ratio"))
    for pct, injected, injected_unit, expected, accept, mpe in points:
        row = {"input_pct": plain(pct), "input": plain(injected), "input_unit": plain(injected_unit),
               "expected": plain(expected), "low": plain(expected - accept), "high": plain(expected + accept),
               "accept": plain(accept), "mpe": plain(mpe)}
        if ratio is not None and row["input"] is not None:
            row["primary"] = row["input"] * ratio
        if ohm and to_amps is not None:
            a, b = to_amps
            row["v_expected"] = plain((a * expected + b) * ohm)
            row["v_low"] = plain((a * (expected - accept) + b) * ohm)
            row["v_high"] = plain((a * (expected + accept) + b) * ohm)
        rows.append(row)
    if ohm and to_amps is None:
        notes.append(f"The output unit {unit} is not a current, so no volts across the shunt are given.")
    ct = plain(reg.get("ct_ratio"))
    return {"asset": {k: plain(v) for k, v in reg.items()}, "plan": plain(plan), "rows": rows, "notes": notes,
            "rule": rule_name, "ct_ratio": ct, "unit": unit, "sections": sections}
