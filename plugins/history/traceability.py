"""Reference traceability: was every instrument of every test within its calibration on the test date?

Each test's source, meter and shunt are looked up in instruments.yaml:

- used after its ``due`` date → the test's reference was out of calibration:
  ``reference_out_of_cal`` is True, a warning names the file and role;
- used before its ``calibrated`` date → the register holds only a later
  certificate, so it does not show the calibration in force that day (an
  auditor asks for that certificate): noted in ``reference_issues``;
- no calibration due date on record → noted likewise.

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
from loopledger.contracts import Command
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl

ROLES = ("source", "meter", "shunt")
USES_COLUMNS = ["test", "source_file", "date", "role", "instrument", "calibrated", "due", "certificate",
                "found_out", "status"]
_NO_CALS = pd.DataFrame(columns=["instrument", "date", "due", "certificate", "as_found", "remarks", "line"])


def in_force(instrument: pd.Series, on: pd.Series, calibrations: pd.DataFrame) -> pd.DataFrame:
    """For each (instrument, date): the certificate in force (the latest calibration on or before the date)
    as ``calibrated``, ``due``, ``certificate``; ``first`` (the instrument's earliest calibration on record,
    for a date before it), and ``found_out`` (the next calibration found the instrument out of tolerance
    as found: 'DATE certificate', '' otherwise). On the index of ``instrument``."""
    cals = calibrations if len(calibrations) else _NO_CALS
    out = pd.DataFrame(index=instrument.index)
    out["calibrated"] = pd.Series(pd.NaT, index=instrument.index, dtype="datetime64[ns]")
    out["due"] = out["calibrated"].copy()
    out["first"] = out["calibrated"].copy()
    out["certificate"] = pd.Series("", index=instrument.index, dtype=object)
    out["found_out"] = pd.Series("", index=instrument.index, dtype=object)
    if cals.empty or instrument.empty:
        return out
    table = pd.DataFrame({"instrument": cals["instrument"].astype(str),
                          "calibrated": pd.to_datetime(cals["date"]).astype("datetime64[ns]"),
                          "due": pd.to_datetime(cals["due"]).astype("datetime64[ns]"),
                          "certificate": cals["certificate"].fillna("").astype(str),
                          "failed": cals["as_found"].fillna("").astype(str) == "fail"}).sort_values("calibrated")
    when = pd.to_datetime(on.astype(str), errors="coerce", format="%Y-%m-%d")
    when = when.where(when.dt.year.between(1900, 2200)).astype("datetime64[ns]")
    left = pd.DataFrame({"instrument": instrument.astype(str), "on": when, "at": instrument.index})
    left = left[left["on"].notna()].sort_values("on")
    back = pd.merge_asof(left, table, left_on="on", right_on="calibrated", by="instrument", direction="backward")
    ahead = pd.merge_asof(left, table.rename(columns={"calibrated": "next"}), left_on="on", right_on="next",
                          by="instrument", direction="forward", allow_exact_matches=False)
    idx = back["at"].to_numpy()
    out.loc[idx, "calibrated"] = back["calibrated"].to_numpy()
    out.loc[idx, "due"] = back["due"].to_numpy()
    out.loc[idx, "certificate"] = back["certificate"].fillna("").to_numpy()
    failed = ahead["failed"].eq(True)
    said = ahead["next"].dt.strftime("%Y-%m-%d") + ahead["certificate"].fillna("").map(
        lambda c: f" (certificate {c})" if c else "")
    out.loc[ahead["at"].to_numpy(), "found_out"] = said.where(failed, "").fillna("").to_numpy()
    out["first"] = instrument.astype(str).map(table.groupby("instrument")["calibrated"].min())
    return out


def uses(tests: pd.DataFrame, instruments: pd.DataFrame, calibrations: pd.DataFrame | None = None) -> pd.DataFrame:
    """One row per (test, role) that names an instrument, with the certificate in force on the test date.

    status: ok | past-due | before-calibration (before the earliest certificate on record) | no-dates (no
    due date in force: nothing says until when it was calibrated) | unknown (not in the register). The one
    classification of a reference's status: :func:`usage` words the same statuses for the handbook.
    ``found_out``: the next calibration found it out of tolerance.
    """
    roles = [r for r in ROLES if r in tests.columns]
    if tests.empty or not roles:
        return pd.DataFrame(columns=USES_COLUMNS)
    long = tests.melt(id_vars=["test", "source_file", "date"], value_vars=roles, var_name="role",
                      value_name="instrument")
    long = long[long["instrument"].notna() & (long["instrument"].astype(str) != "")].copy()
    long["instrument"] = long["instrument"].astype(str)
    reg = instruments if not instruments.empty else pd.DataFrame(columns=["calibrated", "due"])
    cert = in_force(long["instrument"], long["date"], calibrations if calibrations is not None else _NO_CALS)
    long["calibrated"], long["due"], long["certificate"], long["found_out"] = (
        cert["calibrated"], cert["due"], cert["certificate"], cert["found_out"])
    when = pd.to_datetime(long["date"].astype(str), format="%Y-%m-%d", errors="coerce")  # invalid tests: any value
    known = long["instrument"].isin(reg.index)
    early = cert["first"].notna() & (when < cert["first"])
    long["calibrated"] = long["calibrated"].where(~early, cert["first"])  # the first on record, for the words
    long["status"] = np.select(
        [~known, early, long["due"].notna() & (when > long["due"]), long["due"].isna()],
        ["unknown", "before-calibration", "past-due", "no-dates"], default="ok")
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
        return (f"before the earliest calibration on file ({cal.date().isoformat()}); the earlier certificate is "
                "not recorded")
    if on_ts > due_ts:
        return f"OUT OF CALIBRATION: due {due_ts.date().isoformat()}"
    return f"in calibration until {due_ts.date().isoformat()}"


def usage(ctx: RunContext) -> pd.DataFrame:
    """One row per (test, role) naming a reference instrument, with its status on the test date in words:
    the statuses of :func:`uses` (the certificate in force that day), worded as :func:`cal_status` words
    them; ``certificate`` names the certificate in force ('' where none is recorded).
    """
    table = uses(ctx.tests, ctx.instruments, ctx.calibrations)
    if table.empty:
        return pd.DataFrame(columns=["test", "role", "instrument", "date", "status", "out_of_cal", "known",
                                     "certificate"])
    status = table["status"]
    on = _as_dates(table["date"].astype(str))  # invalid tests: any value
    due_text = _as_dates(table["due"]).dt.strftime("%Y-%m-%d")
    first_text = _as_dates(table["calibrated"]).dt.strftime("%Y-%m-%d")  # the first on record, when early
    early = status == "before-calibration"
    certificate = table["certificate"].fillna("").astype(str).where(~early, "")
    named = certificate.map(lambda c: f" (certificate {c})" if c else "")
    out = table[["test", "role", "instrument", "date"]].copy()
    out["status"] = np.select(
        [status == "unknown", early, status == "no-dates", on.isna(), status == "past-due"],
        ["not in instruments.yaml",
         "before the earliest calibration on file (" + first_text + "); the earlier certificate is not recorded",
         "no calibration due date recorded", "due " + due_text, "OUT OF CALIBRATION: due " + due_text + named],
        default="in calibration until " + due_text + named)
    out["out_of_cal"] = (status == "past-due") & on.notna()
    out["known"] = status != "unknown"
    out["certificate"] = certificate
    out["role_order"] = out["role"].map(ROLES.index)
    return out.sort_values(["test", "role_order"], kind="stable").drop(columns="role_order").reset_index(drop=True)


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
         who + " was used before its earliest calibration on record (" + cal + "); the certificate in force "
         "that day is not in instruments.yaml",
         who + " has no calibration due date in instruments.yaml"], default="")
    found = table["found_out"].fillna("").astype(str) if "found_out" in table.columns else \
        pd.Series("", index=table.index)
    out = (who + " was found out of tolerance at its next calibration, " + found + ": see loopledger impacted "
           + table["instrument"].astype(str)).where(found != "", "")
    joined = [("; ".join(p for p in pair if p)) for pair in zip(text, out, strict=True)]
    return pd.Series(joined, index=table.index, dtype=object)


def check(ctx: RunContext) -> list[Finding]:
    table = uses(ctx.tests[ctx.tests["date"].notna()] if "date" in ctx.tests.columns else ctx.tests,
                 ctx.instruments, ctx.calibrations)
    table = table[table["status"] != "unknown"]  # the schema check already reported those
    ctx.stash[keys.REFERENCE_USES] = table
    issues = table[(table["status"] != "ok") | (table["found_out"] != "")].copy()
    issues["text"] = describe(issues)
    by_test = issues.groupby("test")["text"].agg("; ".join)
    past_due = set(issues.loc[issues["status"] == "past-due", "test"])
    ctx.tests["reference_out_of_cal"] = ctx.tests["test"].isin(past_due).astype(bool)
    ctx.tests["reference_found_out"] = ctx.tests["test"].isin(set(issues.loc[issues["found_out"] != "", "test"]))
    said = by_test.to_dict()
    ctx.tests["reference_issues"] = [str(said.get(t, "")) for t in ctx.tests["test"].tolist()]
    named = table[table["certificate"] != ""].sort_values(["test", "role"], key=lambda c: c.map(ROLES.index)
                                                           if c.name == "role" else c, kind="stable")
    certs = (named["instrument"] + ":" + named["certificate"]).groupby(named["test"]).agg(";".join).to_dict()
    ctx.tests["certificates"] = [str(certs.get(t, "")) for t in ctx.tests["test"].tolist()]
    if len(ctx.points):
        ctx.points["certificates"] = [str(certs.get(t, "")) for t in ctx.points["test"].tolist()]
    ctx.stash[keys.REFERENCES_FOUND_OUT] = found_out(ctx)
    exports = ctx.stash.setdefault(keys.TEST_EXPORTS, [])
    exports += [c for c in ("reference_out_of_cal", "reference_found_out", "reference_issues", "certificates",
                            "asset_row") if c not in exports]
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
                "before-calibration": "before the earliest calibration on record",
                "no-dates": "no calibration due date on record"}


def page_rows(ctx: RunContext, tests: list[str]) -> dict[str, list[list[str]]]:
    """What each test's page says of the reference instruments it names, one row per role: role, instrument,
    the certificate in force on the test date, its calibration and due dates, and the status in words (with
    a later calibration's out-of-tolerance finding). The handbook shows them in the test page's one table of
    reference instruments, beside what instruments.yaml says of each."""
    table = ctx.stash.get(keys.REFERENCE_USES)
    if table is None:
        return {}
    mine = table[table["test"].isin(tests)]
    found = mine["found_out"].fillna("").astype(str)
    shown = pd.DataFrame({
        "role": mine["role"], "instrument": mine["instrument"],
        "certificate": mine["certificate"].where(mine["certificate"] != "", "—"),
        **{col: pd.to_datetime(mine[col]).dt.strftime("%Y-%m-%d").fillna("—") for col in ("calibrated", "due")},
        "status": mine["status"].map(STATUS_WORDS).fillna(mine["status"]) + found.map(
            lambda f: f"; FOUND OUT OF TOLERANCE at its next calibration, {f}" if f else ""),
    })
    return grouped(mine["test"].tolist(), shown.to_numpy().tolist())


# --- loopledger impacted ------------------------------------------------------------------------------

def window(ctx: RunContext, instrument: str) -> tuple[dt.date | None, dt.date | None, pd.Series | None]:
    """(since, until, the failing calibration) of the tests to review for ``instrument``: where its latest
    calibration that found it out of tolerance (``as_found: fail``) is on record, from the calibration
    before that one (its previous good calibration; all dates if none) up to the failing one; else from its
    latest calibration on, with no end."""
    cals = ctx.calibrations[ctx.calibrations["instrument"] == instrument] if len(ctx.calibrations) else \
        ctx.calibrations
    if len(cals):
        cals = cals.sort_values("date").reset_index(drop=True)
        failing = cals.index[cals["as_found"].fillna("") == "fail"]
        if len(failing):
            at = int(failing[-1])
            since = pd.Timestamp(cals.at[at - 1, "date"]).date() if at > 0 else None
            return since, pd.Timestamp(cals.at[at, "date"]).date(), cals.loc[at]
    if instrument in ctx.instruments.index:
        cal = ctx.instruments.at[instrument, "calibrated"]
        return (None if pd.isna(cal) else pd.Timestamp(cal).date()), None, None
    return None, None, None


def found_out(ctx: RunContext) -> pd.DataFrame:
    """One row per reference whose latest failing calibration is on record: instrument, date, certificate,
    remarks, since (its previous good calibration) and n_tests (the tests that used it in between): what
    the index lists under what needs action."""
    rows = []
    for ident in sorted(set(ctx.calibrations.loc[ctx.calibrations["as_found"].fillna("") == "fail", "instrument"])
                        if len(ctx.calibrations) else set()):
        since, until, cal = window(ctx, str(ident))
        if cal is None:
            continue
        table, _ = impacted(ctx, str(ident), since, until)
        rows.append({"instrument": str(ident), "date": pd.Timestamp(cal["date"]).date().isoformat(),
                     "certificate": plain_text(cal.get("certificate")), "remarks": plain_text(cal.get("remarks")),
                     "since": since.isoformat() if since else "", "n_tests": len(table)})
    return pd.DataFrame(rows, columns=["instrument", "date", "certificate", "remarks", "since", "n_tests"])


def plain_text(value: Any) -> str:
    return "" if value is None or (isinstance(value, float) and np.isnan(value)) else str(value)


def impacted(ctx: RunContext, instrument: str, since: dt.date | None,
             until: dt.date | None = None) -> tuple[pd.DataFrame, dt.date | None]:
    """Tests that used ``instrument`` on or after ``since`` (default: :func:`window`) and, if given, on or
    before ``until``.

    One row per test: date, test, asset, role, verdict, status (of the instrument on that date, see
    :func:`uses`), source_file, worst_pct (largest |error| as %
    of the acceptance limit) and points (each point's |error| as % of its limit).
    """
    if since is None and until is None:
        since, until, _ = window(ctx, instrument)
    table = uses(ctx.tests, ctx.instruments, ctx.calibrations)
    mine = table[table["instrument"] == instrument]
    on = pd.to_datetime(mine["date"].astype(str), errors="coerce", format="%Y-%m-%d")
    if since is not None:
        mine, on = mine[on >= pd.Timestamp(since)], on[on >= pd.Timestamp(since)]
    if until is not None:
        mine = mine[on <= pd.Timestamp(until)]
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
    parser.add_argument("--since", help="first test date to list (YYYY-MM-DD; default: where a calibration found "
                                        "it out of tolerance, the calibration before that one, and the list ends "
                                        "at the failing one; else its latest calibration on record)")
    parser.add_argument("--error", help="the error its calibration found, signed (+0.02 %%rdg, -0.004 mA): judge "
                                        "the listed tests again with it taken out and say what would change")
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
    start, until, failing = window(ctx, args.instrument)
    table, since = impacted(ctx, args.instrument, since if since is not None else start,
                            until if since is None else None)
    from loopledger.terminal import VisibleLines

    w = VisibleLines(sys.stdout).write  # ids and files quote the evidence: shown inert
    if failing is not None and args.since is None:
        cert = plain_text(failing.get("certificate"))
        w(f"{args.instrument} was found out of tolerance at its calibration of "
          f"{pd.Timestamp(failing['date']).date().isoformat()}" + (f" (certificate {cert})" if cert else "")
          + (f": {plain_text(failing.get('remarks'))}" if plain_text(failing.get("remarks")) else "") + "\n")
    w(f"Tests that used {args.instrument} " + (f"since {since.isoformat()}" if since else "(all dates)")
      + (f" up to {until.isoformat()}" if until is not None and args.since is None else "") + f": {len(table)}\n")
    for r in table.itertuples():
        worst = "—" if pd.isna(r.worst_pct) else f"{r.worst_pct:.0f} %"
        late = "  (used after its due date)" if r.status == "past-due" else ""
        w(f"{r.date}  {r.asset}  {r.verdict}  as {r.role}  worst |error| {worst} of limit  {r.source_file}{late}\n")
        if r.points:
            w(f"    {r.points}\n")
    if args.error:
        _rejudged(ctx, args.instrument, list(table["test"]), args.error)
    return 0


def _rejudged(ctx: RunContext, instrument: str, tests: list[str], text: str) -> None:
    from loopledger.config import ConfigError
    from loopledger.plugins.history.reference_error import parse_error, rejudge

    try:
        error = parse_error(text)
    except ValueError as exc:
        raise ConfigError(str(exc)) from None
    points, verdicts = rejudge(ctx, instrument, tests, error)
    from loopledger.terminal import VisibleLines

    w = VisibleLines(sys.stdout).write  # ids quote the evidence: shown inert
    w(f"Judged again with {instrument}'s found error {text} taken out: {len(points)} point decision(s) and "
      f"{len(verdicts)} verdict(s) would change\n")
    for p in points.itertuples():
        w(f"  {p.test}  {p.phase.replace('_', '-')} {p.input_pct:g} %: error {p.error_before:+.4g} → "
          f"{p.error_after:+.4g} {p.unit}, {p.decision_before} → {p.decision_after}\n")
    for v in verdicts.itertuples():
        w(f"  {v.test}: verdict {v.verdict_before} → {v.verdict_after}\n")


@hookimpl
def ll_cli_commands() -> list[Command]:
    return [Command("impacted", "list the tests that used a reference instrument since its last good calibration",
                    _add_arguments, _run)]
