"""Every out-of-tolerance event on record: each test whose as-found phase failed, adjusted or not, latest
or not.

Leaves ``ctx.stash[keys.AS_FOUND_FAILURES]``, one row per such test in date order: its asset, date, worst
as-found point (|error| against the acceptance limit), what was done and the as-left result:

- ``adjusted``: the file has an as-left phase (the device was adjusted and tested again);
- ``replaced``: the remarks say the device was replaced ("was replaced", "replaced with ...");
- ``not adjusted``: neither.

Where nothing was done in the test itself, ``put_right`` is the date of the asset's next test whose
result passed (verdict pass or adjusted), the day the fault was put right on the record. The failures
page and ``loopledger check`` list these rows; the page does not work them out again.
"""

from __future__ import annotations

import bisect

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl

COLUMNS = ["asset", "test", "date", "source_file", "worst", "worst_pct", "action", "as_left", "put_right"]
#: remarks saying the device was swapped for another: "was replaced", "replaced with/by" (our own pattern; a
#: replacement only requested, "until replaced", is not one)
REPLACED = r"(?i)\b(?:was|were|been|is|now)\s+replaced\b|\breplaced\s+(?:with|by)\b"


def as_found_failures(points: pd.DataFrame, tests: pd.DataFrame) -> pd.DataFrame:
    """The table described in the module's docstring (empty, with its columns, when nothing failed)."""
    needed = {"test", "phase", "decision", "error", "input_pct", "output_unit"}
    if points.empty or tests.empty or not needed <= set(points.columns) or "as_found" not in tests.columns:
        return pd.DataFrame(columns=COLUMNS)
    valid = tests[tests["valid"].astype(bool)]
    failed = valid[valid["as_found"] == "fail"]
    if failed.empty:
        return pd.DataFrame(columns=COLUMNS)
    found = points[(points["phase"] == "as_found") & points["test"].isin(failed["test"])]
    limit = found["acceptance_limit"] if "acceptance_limit" in found.columns else found["mpe"]
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = (found["error"].abs() / limit.where(limit > 0) * 100.0).fillna(np.inf)
    worst = found.assign(_ratio=ratio).sort_values(["test", "_ratio"], ascending=[True, False]).drop_duplicates("test")
    worst = worst.set_index("test")
    words = (worst["input_pct"].map("{:g} %".format) + ": error " + worst["error"].map("{:+.4g}".format) + " "
             + worst["output_unit"].astype(str) + ", "
             + worst["_ratio"].map(lambda r: "no limit" if not np.isfinite(r) else f"{r:.0f} % of the limit"))
    out = failed.set_index("test")[["asset", "date", "source_file"]].copy()
    out["worst"] = words.reindex(out.index).fillna("")
    out["worst_pct"] = worst["_ratio"].reindex(out.index).replace(np.inf, np.nan)
    remarks = failed.set_index("test")["remarks"].fillna("").astype(str) if "remarks" in failed.columns \
        else pd.Series("", index=out.index)
    has_left = failed.set_index("test")["as_left"].fillna("").astype(str) != ""
    out["action"] = np.where(remarks.str.contains(REPLACED), "replaced",
                             np.where(has_left, "adjusted", "not adjusted"))
    out["as_left"] = failed.set_index("test")["as_left"].fillna("").astype(str)
    out["put_right"] = _put_right(valid, out[~has_left.reindex(out.index).to_numpy()])
    out["put_right"] = out["put_right"].fillna("")
    return out.reset_index().sort_values(["date", "test"], kind="stable").reset_index(drop=True)[COLUMNS]


def _put_right(valid: pd.DataFrame, open_events: pd.DataFrame) -> pd.Series:
    """For each event with no as-left phase: the date of the asset's next passing test (NaN if none). Each
    asset's passing dates are sorted once and searched by bisection (one pass over the fleet, not one per
    event)."""
    if open_events.empty:
        return pd.Series(dtype=object)
    good = valid[valid["verdict"].isin(["pass", "adjusted"])][["asset", "date"]].sort_values("date", kind="stable")
    passes: dict[object, list[object]] = good.groupby("asset", sort=False)["date"].agg(list).to_dict()
    out = {}
    for test, asset, date in zip(open_events.index, open_events["asset"], open_events["date"], strict=True):
        dates = passes.get(asset, [])
        at = bisect.bisect_right(dates, date)  # the first passing date after the event's
        out[test] = dates[at] if at < len(dates) else np.nan
    return pd.Series(out, dtype=object)


@hookimpl
def ll_history(ctx: RunContext) -> list[Finding]:
    ctx.stash[keys.AS_FOUND_FAILURES] = as_found_failures(ctx.points, ctx.tests)
    return []
