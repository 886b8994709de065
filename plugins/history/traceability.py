"""Reference traceability: was every instrument of every test within its calibration on the test date?

Each test's source, meter and shunt are looked up in instruments.yaml:

- used after its ``due`` date → the test's reference was out of calibration:
  ``reference_out_of_cal`` is True, a warning names the file and role;
- used before its ``calibrated`` date → the register holds only a later
  certificate, so it does not show the calibration in force that day (an
  auditor asks for that certificate): noted in ``reference_issues``;
- no dates on record → noted likewise.

``loopledger impacted INSTRUMENT [--since DATE]`` lists every test that used
the instrument since its last good calibration (default: its ``calibrated``
date on record), with the asset, the verdict and, per point, |error| as a
percentage of the acceptance limit: the review list after a reference
instrument fails its own calibration.
"""

from __future__ import annotations

import argparse
import datetime as dt
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.cells import grouped
from loopledger.context import RunContext
from loopledger.contracts import Command, Section
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl

ROLES = ("source", "meter", "shunt")
USES_COLUMNS = ["test", "source_file", "date", "role", "instrument", "calibrated", "due", "status"]


def uses(tests: pd.DataFrame, instruments: pd.DataFrame) -> pd.DataFrame:
    """One row per (test, role) that names an instrument, with its dates and status.

    status: ok | past-due | before-calibration | no-dates | unknown (not in the register).
    """
    roles = [r for r in ROLES if r in tests.columns]
    if tests.empty or not roles:
        return pd.DataFrame(columns=USES_COLUMNS)
    long = tests.melt(id_vars=["test", "source_file", "date"], value_vars=roles, var_name="role",
                      value_name="instrument")
    long = long[long["instrument"].notna() & (long["instrument"].astype(str) != "")].copy()
    long["instrument"] = long["instrument"].astype(str)
    reg = instruments if not instruments.empty else pd.DataFrame(columns=["calibrated", "due"])
    for col in ("calibrated", "due"):
        long[col] = pd.to_datetime(long["instrument"].map(reg[col]) if col in reg.columns else pd.NaT)
    when = pd.to_datetime(long["date"].astype(str), format="%Y-%m-%d", errors="coerce")  # invalid tests: any value
    known = long["instrument"].isin(reg.index)
    long["status"] = np.select(
        [~known, long["due"].notna() & (when > long["due"]),
         long["calibrated"].notna() & (when < long["calibrated"]), long["calibrated"].isna() & long["due"].isna()],
        ["unknown", "past-due", "before-calibration", "no-dates"], default="ok")
    return long.sort_values(["source_file", "role"], kind="stable").reset_index(drop=True)[USES_COLUMNS]


def _column(frame: pd.DataFrame, name: str, default: Any = np.nan) -> pd.Series:
    return frame[name] if name in frame.columns else pd.Series(default, index=frame.index)


def _as_dates(values: pd.Series) -> pd.Series:
    return pd.to_datetime(values, errors="coerce", format="ISO8601")


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
    cal = pd.Series(_as_dates(_column(inst, "calibrated").reindex(long["instrument"])).to_numpy(), index=long.index)
    due = pd.Series(_as_dates(_column(inst, "due").reindex(long["instrument"])).to_numpy(), index=long.index)
    on = _as_dates(long["date"].astype(str))  # invalid tests: any value
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


def describe(table: pd.DataFrame) -> pd.Series:
    """One sentence per (test, role) row whose status is not ok ('' where it is)."""
    if table.empty:  # e.g. every file invalid: the date columns are then not datetimes
        return pd.Series([], index=table.index, dtype=object)
    who = table["role"].astype(str) + " " + table["instrument"].astype(str)
    due = table["due"].dt.strftime("%Y-%m-%d")
    cal = table["calibrated"].dt.strftime("%Y-%m-%d")
    text = np.select(
        [table["status"] == "past-due", table["status"] == "before-calibration", table["status"] == "no-dates"],
        [who + " was past its calibration due date " + due,
         who + " was used before its calibration on record (" + cal + "); the certificate in force that day "
         "is not in instruments.yaml",
         who + " has no calibration dates in instruments.yaml"], default="")
    return pd.Series(text, index=table.index, dtype=object)


def check(ctx: RunContext) -> list[Finding]:
    table = uses(ctx.tests[ctx.tests["date"].notna()] if "date" in ctx.tests.columns else ctx.tests,
                 ctx.instruments)
    table = table[table["status"] != "unknown"]  # the schema check already reported those
    ctx.stash[keys.REFERENCE_USES] = table
    issues = table[table["status"] != "ok"].copy()
    issues["text"] = describe(issues)
    by_test = issues.groupby("test")["text"].agg("; ".join)
    past_due = set(issues.loc[issues["status"] == "past-due", "test"])
    ctx.tests["reference_out_of_cal"] = ctx.tests["test"].isin(past_due).astype(bool)
    said = by_test.to_dict()
    ctx.tests["reference_issues"] = [str(said.get(t, "")) for t in ctx.tests["test"].tolist()]
    exports = ctx.stash.setdefault(keys.TEST_EXPORTS, [])
    exports += [c for c in ("reference_out_of_cal", "reference_issues") if c not in exports]
    # a warning only where the register shows the instrument out of calibration; the other issues are
    # in reference_issues and on the test page (one note per historical test would bury the warnings)
    # nor where the date itself is an error (in the future, or a typing slip): the file says so already
    bad_date = {f.file for f in ctx.findings if f.severity == "error" and f.field == "date"}
    return [warning(f"test of {row.date}: {row.text}", file=row.source_file, field=f"instruments.{row.role}",
                    code="reference-past-due") for row in issues[issues["status"] == "past-due"].itertuples()
            if row.source_file not in bad_date]


@hookimpl
def ll_history(ctx: RunContext) -> list[Finding]:
    if ctx.tests.empty:
        return []
    return check(ctx)


#: how a page words each status of :func:`uses`
STATUS_WORDS = {"ok": "within calibration", "past-due": "PAST DUE on the test date",
                "before-calibration": "before the calibration on record", "no-dates": "no dates on record"}


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    table = ctx.stash.get(keys.REFERENCE_USES)
    if table is None:
        return {}
    mine = table[table["test"].isin(tests)]
    shown = pd.DataFrame({
        "role": mine["role"], "instrument": mine["instrument"],
        **{col: pd.to_datetime(mine[col]).dt.strftime("%Y-%m-%d").fillna("—") for col in ("calibrated", "due")},
        "status": mine["status"].map(STATUS_WORDS).fillna(mine["status"]),
    })
    rows = grouped(mine["test"].tolist(), shown.to_numpy().tolist())
    return {test: [Section(title="Reference instruments on the test date", kind="table", order=40,
                           columns=["Role", "Instrument", "Calibrated", "Due", "Status"], rows=body)]
            for test, body in rows.items()}


# --- loopledger impacted ------------------------------------------------------------------------------

def impacted(ctx: RunContext, instrument: str, since: dt.date | None) -> tuple[pd.DataFrame, dt.date | None]:
    """Tests that used ``instrument`` on or after ``since`` (default: its calibrated date on record).

    One row per test: date, test, asset, role, verdict, status (of the instrument on that date, see
    :func:`uses`), source_file, worst_pct (largest |error| as %
    of the acceptance limit) and points (each point's |error| as % of its limit).
    """
    if since is None and instrument in ctx.instruments.index:
        cal = ctx.instruments.at[instrument, "calibrated"]
        since = None if pd.isna(cal) else pd.Timestamp(cal).date()
    table = uses(ctx.tests, ctx.instruments)
    mine = table[table["instrument"] == instrument]
    if since is not None:
        mine = mine[pd.to_datetime(mine["date"].astype(str), errors="coerce", format="%Y-%m-%d") >= pd.Timestamp(since)]
    mine = mine.groupby("test", sort=False).agg(date=("date", "first"), role=("role", ", ".join),
                                                source_file=("source_file", "first"), status=("status", "first"))
    info = ctx.tests.set_index("test")
    mine["asset"] = info["asset"].reindex(mine.index)
    mine["verdict"] = info["verdict"].reindex(mine.index)
    pts = ctx.points[ctx.points["test"].isin(mine.index)] if not ctx.points.empty else ctx.points
    if len(pts) and "acceptance_limit" in pts.columns:
        pct = (pts["error"].abs() / pts["acceptance_limit"] * 100.0)
        label = (pts["phase"].str.replace("_", "-") + " " + pts["input_pct"].map("{:g} %".format) + ": "
                 + pct.map("{:.0f} %".format))
        mine["worst_pct"] = pct.groupby(pts["test"]).max().reindex(mine.index)
        mine["points"] = label.groupby(pts["test"]).agg(", ".join).reindex(mine.index).fillna("")
    else:
        mine["worst_pct"] = np.nan
        mine["points"] = ""
    out = mine.reset_index().sort_values(["date", "test"], kind="stable")
    return out[["date", "test", "asset", "role", "verdict", "status", "worst_pct", "points", "source_file"]], since


def _add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("instrument", help="the instrument id in instruments.yaml")
    parser.add_argument("--since", help="first test date to list (YYYY-MM-DD; default: the instrument's calibrated "
                                        "date on record, taken as its last good calibration)")
    parser.add_argument("--evidence", type=Path,
                        help="the evidence folder (default: the nearest folder at or above here holding assets.csv)")
    parser.add_argument("--as-of", dest="as_of", help="judge on this date (YYYY-MM-DD)")


def _run(args: argparse.Namespace) -> int:
    from loopledger import runner
    from loopledger.commands.check import find_evidence
    from loopledger.commands.run import overrides
    from loopledger.config import ConfigError
    from loopledger.host import get_plugin_manager
    from loopledger.registry import absent

    since = None
    if args.since:
        try:
            since = dt.date.fromisoformat(args.since)
        except ValueError as exc:
            raise ConfigError(f"--since '{args.since}' is not a date (YYYY-MM-DD)") from exc
    evidence = args.evidence or find_evidence([Path.cwd()])
    ctx = runner.run(runner.RunOptions(evidence, overrides=overrides(args)), get_plugin_manager())
    if args.instrument not in ctx.instruments.index:
        known = ", ".join(sorted(ctx.instruments.index)) or "none"
        raise ConfigError(absent("instrument", args.instrument, ctx.rejected_instruments, "instruments.yaml")
                          + ("" if args.instrument in ctx.rejected_instruments else f" (known: {known})"))
    table, since = impacted(ctx, args.instrument, since)
    from loopledger.terminal import VisibleLines

    w = VisibleLines(sys.stdout).write  # ids and files quote the evidence: shown inert
    w(f"Tests that used {args.instrument} " + (f"since {since.isoformat()}" if since else "(all dates)")
      + f": {len(table)}\n")
    for r in table.itertuples():
        worst = "—" if pd.isna(r.worst_pct) else f"{r.worst_pct:.0f} %"
        late = "  (used after its due date)" if r.status == "past-due" else ""
        w(f"{r.date}  {r.asset}  {r.verdict}  as {r.role}  worst |error| {worst} of limit  {r.source_file}{late}\n")
        if r.points:
            w(f"    {r.points}\n")
    return 0


@hookimpl
def ll_cli_commands() -> list[Command]:
    return [Command("impacted", "list the tests that used a reference instrument since its last good calibration",
                    _add_arguments, _run)]
