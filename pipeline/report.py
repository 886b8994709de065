"""Terminal output: the run summary (rich) and the plain pre-commit style lines."""

from __future__ import annotations

from collections.abc import Callable
from typing import TextIO

import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.findings import Finding, by_file
from loopledger.terminal import cell
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table


def progress_factory(console: Console, threshold: int = 200) -> Callable[[int, int], Callable[[int], None]]:
    """A progress bar for reading many files (only on a terminal, only past ``threshold`` files)."""
    state: dict[str, Progress] = {}

    def start(total: int, _: int) -> Callable[[int], None]:
        if total < threshold or not console.is_terminal:
            return lambda n: None
        bar = Progress(TextColumn("reading result files"), BarColumn(), MofNCompleteColumn(),
                       TimeElapsedColumn(), console=console, transient=True)
        task = bar.add_task("read", total=total)
        bar.start()
        state["bar"] = bar
        done = {"n": 0}

        def tick(n: int) -> None:
            done["n"] += n
            bar.advance(task, n)
            if done["n"] >= total:
                bar.stop()
        return tick
    return start


def point_findings(ctx: RunContext) -> list[Finding]:
    """The judgement as findings: failing points, as errors in the final phase, warnings if later adjusted."""
    pts = ctx.points
    if pts.empty or "decision" not in pts:
        return []
    tests = ctx.tests.set_index("test")
    out = []
    failing = pts[pts["decision"] != "pass"]
    taken = pts["accepted"] if "accepted" in pts.columns else pts["decision"] == "pass"
    for row, ok in zip(failing.itertuples(), taken[failing.index].tolist(), strict=True):
        adjusted = row.phase == "as_found" and tests.at[row.test, "as_left"] == "pass"
        # a conditional pass fails the test (ILAC-G8 binary statement) unless the site accepts it knowingly
        severity = "warning" if adjusted or ok else "error"
        note = " (adjusted; as-left passes)" if adjusted else ""
        out.append(Finding(severity, f"{row.decision}: error {row.error:+.4g} {row.output_unit} "
                           f"({row.error_pct_span:+.3g} % of span) against MPE ±{row.mpe:.4g} "
                           f"{row.output_unit}{note}", file=row.source_file, line=int(row.line),
                           point=f"{row.phase} #{row.point}", code="judgement"))
    return out


def print_lines(findings: list[Finding], stream: TextIO) -> None:
    for f in findings:
        stream.write(f.format() + "\n")


#: rows of the "needing attention" table shown without --verbose
TABLE_ROWS = 50


def print_failures(ctx: RunContext, stream: TextIO) -> None:
    """The failures view: every as-found failure the history stage listed (adjusted or not, latest or
    not), one line each, oldest first."""
    from loopledger import keys
    from loopledger.terminal import visible

    events = ctx.stash.get(keys.AS_FOUND_FAILURES)
    if not isinstance(events, pd.DataFrame) or events.empty:
        return
    stream.write(f"as-found failures on record: {len(events)}\n")
    for e in events.itertuples():
        after = f"; as left {e.as_left}" if e.as_left else ""
        fixed = f"; put right {e.put_right}" if e.put_right else ""
        line = f"  {e.date}  {e.asset}  worst {e.worst}; {e.action}{after}{fixed}  ({e.source_file})"
        stream.write(visible(line) + "\n")  # ids and file names quote the evidence: shown inert


def _worst_points(ctx: RunContext, problems: pd.DataFrame) -> pd.DataFrame:
    """Per failing test: how many points of its final phase were not accepted, and the worst |error|.

    One grouped pass over the point table (a mask per test was quadratic in a large fleet).
    """
    pts = ctx.points
    if pts.empty or "decision" not in pts:
        return pd.DataFrame(columns=["n", "worst"])
    final = problems.set_index("test")["as_left"].map(lambda v: "as_left" if v else "as_found")
    taken = pts["accepted"].astype(bool) if "accepted" in pts.columns else pts["decision"] == "pass"
    outside = pts[~taken & pts["test"].isin(final.index)]
    outside = outside[outside["phase"].to_numpy() == outside["test"].map(final).to_numpy()]
    return outside.groupby("test").agg(n=("error_pct_span", "size"),
                                       worst=("error_pct_span", lambda v: v.abs().max()))


def _more(console: Console, hidden: int, what: str) -> None:
    if hidden > 0:
        console.print(f"  … {hidden} more {what} (use --verbose, or see data/tests.csv)")


def summary(ctx: RunContext, console: Console, *, verbose: bool = False) -> None:
    tests = ctx.tests
    counts = tests["verdict"].value_counts().to_dict() if not tests.empty else {}
    n_assets = tests.loc[tests["valid"].astype(bool), "asset"].nunique() if not tests.empty else 0
    console.print(f"[bold]loopledger[/] read {len(tests)} result file{'' if len(tests) == 1 else 's'} for "
                  f"{n_assets} asset{'' if n_assets == 1 else 's'} "
                  f"(judged on {ctx.as_of.isoformat()}, rule '{cell(ctx.section('decision').get('rule', 'simple'))}')")
    line = ", ".join(f"{counts.get(v, 0)} {v}" for v in ("pass", "adjusted", "fail", "invalid"))
    console.print(f"  tests: {line}")
    note = ctx.stash.get(keys.DECISION_NOTE)
    if note:
        console.print(f"  note: {note}", markup=False, highlight=False)
    valid = tests[tests["valid"].astype(bool)] if not tests.empty else tests
    latest = valid.sort_values(["date", "test"]).groupby("asset").tail(1) if not valid.empty else valid
    failing = latest[latest["verdict"] == "fail"] if not latest.empty else latest
    earlier = int((valid["verdict"] == "fail").sum()) - len(failing) if not valid.empty else 0
    if len(failing):
        table = Table(title="Assets whose latest test failed", title_justify="left")
        for col in ("asset", "date", "test", "why"):
            table.add_column(col, overflow="fold")
        shown_rows = failing if verbose else failing.head(TABLE_ROWS)
        worst = _worst_points(ctx, shown_rows)
        for row in shown_rows.itertuples():
            n, pct = (worst.loc[row.test, "n"], worst.loc[row.test, "worst"]) if row.test in worst.index \
                else (0, float("nan"))
            table.add_row(cell(row.asset), cell(row.date), cell(row.test),
                          f"{int(n)} point(s) not accepted, worst {pct:.3g} % of span")
        console.print(table)
        _more(console, len(failing) - len(shown_rows), "assets whose latest test failed")
    if earlier > 0:
        console.print(f"  {earlier} earlier test(s) failed and were followed by later tests (see the handbook)")
    errors: dict[str, str] = {}
    for rel, found in by_file(ctx.findings).items():
        first = next((f for f in found if f.severity == "error"), None)
        if first is not None:
            errors[rel] = first.message + (f" [{first.field}]" if first.field else "")
    invalid = tests[tests["verdict"] == "invalid"] if not tests.empty else tests
    if len(invalid):
        table = Table(title="Result files that could not be judged", title_justify="left")
        table.add_column("file", overflow="fold")
        table.add_column("first problem", overflow="fold")
        shown_invalid = invalid if verbose else invalid.head(TABLE_ROWS)
        for row in shown_invalid.itertuples():
            table.add_row(cell(row.source_file), cell(errors.get(row.source_file, "")))
        console.print(table)
        _more(console, len(invalid) - len(shown_invalid), "files that could not be judged")
    shown = [f for f in ctx.findings if verbose or f.severity != "note"]
    other = [f for f in shown if f.severity == "warning" or not f.file]
    if other:
        console.print(f"[bold]{len(other)} warning(s) and registry finding(s):[/]")
        for f in other[: 40 if not verbose else None]:
            console.print("  " + f.format(), markup=False, highlight=False, soft_wrap=True)
        if len(other) > 40 and not verbose:
            console.print(f"  … {len(other) - 40} more (use --verbose, or see data/tests.csv)")
