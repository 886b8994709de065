"""Nothing changes silently (issue 20): each test's verdict against the previous complete run in the same
OUT.

The engine hands over the previous run's ``data/tests.csv`` and ``data/changes.csv``
(``keys.PREVIOUS_RUN``, read before the new tables replace them). A test whose result file is the same
(same sha256) but whose verdict is not was re-judged by something outside it; the run warns, naming the
cause it can see:

- the assets.csv row in force is another line, or the same line with other contents;
- the certificates in force are others, or an instrument's entry in instruments.yaml changed;
- neither: the settings (decision rule, as_of) or the program changed.

``tests.csv`` gains ``verdict_changed`` (the previous verdict, blank when unchanged) and
``changed_because``, and the two digests the next run compares (``asset_row_sha256``,
``references_sha256``). ``changes.csv`` keeps every such change with the date of the run that saw it:
the previous run's list with this run's added (the handbook's changes page shows it).
"""

from __future__ import annotations

import datetime as dt
import hashlib

import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl, needs

CHANGES_COLUMNS = ["run_date", "test", "asset", "date", "source_file", "verdict_before", "verdict_after",
                   "changed_because"]


def _digest(parts: list[str]) -> str:
    return hashlib.sha256("\x1f".join(parts).encode("utf-8")).hexdigest()[:16]


def digests(ctx: RunContext) -> tuple[pd.Series, pd.Series]:
    """Per test (on ctx.tests' index): a digest of the assets.csv row in force, and one of its reference
    instruments' entries with every certificate on record."""
    rows = ctx.asset_rows
    by_line = {}
    if len(rows):
        text = rows.drop(columns=["asset_row"])
        by_line = dict(zip(rows["asset_row"].astype(int),
                           [_digest([str(v) for v in r]) for r in text.itertuples(index=False)], strict=True))
    lines = pd.to_numeric(ctx.tests["asset_row"], errors="coerce") if "asset_row" in ctx.tests.columns else \
        pd.Series(float("nan"), index=ctx.tests.index)
    asset = pd.Series([by_line.get(int(v), "") if pd.notna(v) else "" for v in lines], index=ctx.tests.index)
    entries: dict[str, str] = {}
    cals = ctx.calibrations
    for ident in ctx.instruments.index.astype(str):
        mine = cals[cals["instrument"] == ident] if len(cals) else cals
        parts = [str(v) for v in ctx.instruments.loc[ident].tolist()] + [
            "|".join(str(v) for v in r) for r in mine.drop(columns=["line"], errors="ignore").itertuples(index=False)]
        entries[ident] = _digest(parts)
    roles = [r for r in ("source", "meter", "shunt") if r in ctx.tests.columns]
    refs = ctx.tests[roles].astype(object).where(ctx.tests[roles].notna(), "")
    reference = pd.Series([_digest([f"{i}:{entries.get(str(i), '')}" for i in r if i])
                           for r in refs.itertuples(index=False)], index=ctx.tests.index)
    return asset, reference


def compare(ctx: RunContext, previous: pd.DataFrame, today: dt.date) -> tuple[pd.DataFrame, list[Finding]]:
    """This run's changes (``CHANGES_COLUMNS``) and a warning for each; fills the tests' columns."""
    tests = ctx.tests
    tests["verdict_changed"] = ""
    tests["changed_because"] = ""
    if previous.empty or not {"source_file", "sha256", "verdict"} <= set(previous.columns):
        return pd.DataFrame(columns=CHANGES_COLUMNS), []
    if "verdict" not in tests.columns:  # nothing was judged (every file invalid): no verdict to compare yet
        return pd.DataFrame(columns=CHANGES_COLUMNS), []
    before = previous.drop_duplicates("source_file").set_index("source_file")
    at = tests["source_file"].map(lambda f: f in before.index)
    same = at & (tests["sha256"] == tests["source_file"].map(before["sha256"]))
    was = tests["source_file"].map(before["verdict"]).fillna("")
    changed = tests.index[same & (was != tests["verdict"].astype(str)) & (was != "")]
    rows: list[dict[str, str]] = []
    findings: list[Finding] = []
    for i in changed:
        old = before.loc[tests.at[i, "source_file"]]
        because = _because(tests.loc[i], old)
        tests.at[i, "verdict_changed"] = was[i]
        tests.at[i, "changed_because"] = because
        rows.append({"run_date": today.isoformat(), "test": str(tests.at[i, "test"]),
                     "asset": str(tests.at[i, "asset"]), "date": str(tests.at[i, "date"]),
                     "source_file": str(tests.at[i, "source_file"]),
                     "verdict_before": str(was[i]), "verdict_after": str(tests.at[i, "verdict"]),
                     "changed_because": because})
        findings.append(warning(f"verdict changed from {was[i]} to {tests.at[i, 'verdict']} although this file did "
                                f"not change: {because}", file=str(tests.at[i, "source_file"]),
                                field="verdict", code="verdict-changed"))
    return pd.DataFrame(rows, columns=CHANGES_COLUMNS), findings


def _text(value: object) -> str:
    return "" if value is None or (isinstance(value, float) and pd.isna(value)) else str(value)


def _because(now: pd.Series, old: pd.Series) -> str:
    """The causes that can be seen from the two runs' tests.csv rows."""
    causes = []
    row_now, row_old = _text(now.get("asset_row")).removesuffix(".0"), _text(old.get("asset_row")).removesuffix(".0")
    if row_old and row_now != row_old:
        causes.append(f"it is now judged against assets.csv line {row_now or '(none)'} (was line {row_old})")
    elif _text(old.get("asset_row_sha256")) not in ("", _text(now.get("asset_row_sha256"))):
        causes.append(f"assets.csv line {row_now} (the row in force on its date) changed")
    certs_now, certs_old = _text(now.get("certificates")), _text(old.get("certificates"))
    if certs_now != certs_old and (certs_now or certs_old):
        causes.append(f"the certificates in force are now {certs_now or 'none recorded'} (were "
                      f"{certs_old or 'none recorded'})")
    elif _text(old.get("references_sha256")) not in ("", _text(now.get("references_sha256"))):
        named = ", ".join(_text(now.get(r)) for r in ("source", "meter", "shunt") if _text(now.get(r)))
        causes.append(f"the instruments.yaml entry of {named} changed")
    return "; ".join(causes) or "neither its register row nor its instruments changed: the settings (decision " \
        "rule, as_of) or the program did"


@hookimpl
@needs("tests.certificates")
def ll_history(ctx: RunContext) -> list[Finding]:
    asset, reference = digests(ctx)
    ctx.tests["asset_row_sha256"], ctx.tests["references_sha256"] = asset, reference
    previous = ctx.stash.get(keys.PREVIOUS_RUN) or {}
    new, findings = compare(ctx, previous.get("tests", pd.DataFrame()), dt.date.today())
    kept = previous.get("changes", pd.DataFrame(columns=CHANGES_COLUMNS))
    kept = kept.reindex(columns=CHANGES_COLUMNS) if len(kept) else pd.DataFrame(columns=CHANGES_COLUMNS)
    ctx.stash[keys.VERDICT_CHANGES] = pd.concat([kept, new], ignore_index=True) if len(new) else kept
    exports = ctx.stash.setdefault(keys.TEST_EXPORTS, [])
    exports += [c for c in ("verdict_changed", "changed_because", "asset_row_sha256", "references_sha256")
                if c not in exports]
    return findings


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    changes = ctx.stash.get(keys.VERDICT_CHANGES)
    return {"changes": changes if isinstance(changes, pd.DataFrame) else pd.DataFrame(columns=CHANGES_COLUMNS)}
