"""``loopledger explain RESULT_FILE``: the calculation trail of one test, point by point, in the terminal.

For each point: the input and expected output, how the reading became the measured output, the
error, the whole uncertainty budget, u, ν_eff, k, U, TUR, the specific risk and the decision with
the rule and acceptance limit that made it; then the single-test analysis and the method
comparison. Exit codes as for ``run`` (1 when the test fails).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TextIO, cast

import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.contracts import Command
from loopledger.hookspecs import hookimpl
from loopledger.plugins.uncertainty.uncertainty import fmt, percent


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("result_file", type=Path, help="one result file")
    parser.add_argument("--evidence", type=Path,
                        help="the evidence folder (default: the nearest parent holding assets.csv)")
    parser.add_argument("--rule", help="decision rule, overriding loopledger.toml")
    parser.add_argument("--as-of", dest="as_of", help="judge on this date (YYYY-MM-DD)")


def conversion(ctx: RunContext, r: pd.Series) -> str:
    """How the reading became the measured output, in words and numbers."""
    unit = r["output_unit"]
    if r["method"] == "shunt":
        from loopledger.plugins.measure.reading_methods import shunt_ohms

        ohms = float(shunt_ohms(ctx, pd.Series([r["shunt"]], dtype=object)).iloc[0])
        return f"{r['reading_text']} / {ohms:g} Ω (shunt {r['shunt']}) = {fmt(r['measured'], 6)} {unit}"
    if r["method"] == "display":
        return (f"displayed {r['reading_text']} mapped onto {r['output_min']:g}-{r['output_max']:g} {unit} "
                f"→ {fmt(r['measured'], 6)} {unit}")
    if isinstance(r["meter"], str):
        return f"{r['reading_text']} read on the meter {r['meter']} → {fmt(r['measured'], 6)} {unit}"
    return f"{r['reading_text']} (method {r['method']}) → {fmt(r['measured'], 6)} {unit}"


def _given(head: pd.Series, name: str, suffix: str = "") -> str:
    """A header field as given, or "none given" when the file leaves it out (never "nan")."""
    value = head.get(name)
    return "none given" if value is None or (not isinstance(value, str) and pd.isna(value)) else f"{value}{suffix}"


def _with(text: str, after: str) -> str:
    """``text`` and its unit (or ``:1``); a figure not worked out is a dash alone."""
    return text if text == "—" else text + after


def write(ctx: RunContext, test: str, out: TextIO) -> None:
    pts = ctx.points[ctx.points["test"] == test].sort_values(["phase", "point"])
    head = ctx.tests[ctx.tests["test"] == test].iloc[0]
    budget = ctx.stash.get(keys.BUDGET, pd.DataFrame(columns=["test"]))
    budget = budget[budget["test"] == test]
    rule = ctx.decision_rules.get(str(head.get("decision_rule")))
    out.write(f"Test {test} ({head['source_file']})\n")
    out.write(f"  asset {head['asset']} on {head['date']}, method {head['method']}, "
              f"source {_given(head, 'source')}, meter {_given(head, 'meter')}, shunt {_given(head, 'shunt')}, "
              f"ambient {_given(head, 'ambient_c', ' °C')}\n")
    out.write(f"  decision rule: {head.get('decision_rule')}"
              f"{' — ' + rule.description if rule is not None else ''}\n")
    out.write(f"  verdict: {head['verdict']}\n")
    for _, r in pts.iterrows():
        unit = r["output_unit"]
        out.write(f"\n{str(r['phase']).replace('_', '-')} #{r['point']} (line {r['line']})\n")
        out.write(f"  input        {r['input']} = {r['input_pct']:.4g} % of range → "
                  f"expected {r['expected']:.6g} {unit}\n")
        out.write(f"  conversion   {conversion(ctx, r)}\n")
        out.write(f"  error        {r['error']:+.5g} {unit} ({r['error_pct_span']:+.4g} % of span); "
                  f"MPE ±{r['mpe']:.4g} {unit}\n")
        rows = budget[(budget["phase"] == r["phase"]) & (budget["point"] == r["point"])]
        out.write(f"  budget       {'component':<20}{'distribution':<17}{'half-width':>18}{'divisor':>9}"
                  f"{'sensitivity':>13}{'u_i (' + unit + ')':>14}{'dof':>6}\n")
        for b in rows.itertuples():
            out.write(f"               {b.component:<20}{b.distribution:<17}{fmt(b.half_width) + ' ' + str(b.unit):>18}"
                      f"{fmt(b.divisor):>9}{fmt(b.sensitivity):>13}{fmt(b.contribution):>14}{fmt(b.dof, 3):>6}\n")
        out.write(f"  combined     u = {_with(fmt(r.get('u')), ' ' + unit)}, ν_eff = {fmt(r.get('nu_eff'), 3)}, "
                  f"k = {fmt(r.get('k'), 4)}, U = {_with(fmt(r.get('U')), ' ' + unit)} (95.45 %)\n")
        out.write(f"  capability   TUR = {_with(fmt(r.get('tur'), 3), ':1')}, "
                  f"specific risk = {percent(r.get('risk'))}\n")
        out.write(f"  decision     {r['decision']} by rule {r['decision_rule']} "
                  f"(acceptance limit |e| ≤ {fmt(r['acceptance_limit'])} {unit})\n")
    analysis = ctx.stash.get(keys.ANALYSIS)
    if analysis is not None:
        from loopledger.plugins.analyse.linearity import LABELS, SIGNED, TEST_COLUMNS

        for row in analysis[analysis["test"] == test].itertuples():
            out.write(f"\nanalysis ({str(row.phase).replace('_', '-')}, % of span)\n")
            for col in TEST_COLUMNS:
                value = getattr(row, col)
                text = "—" if pd.isna(value) else f"{value:+.4f}" if col in SIGNED else f"{value:.4f}"
                out.write(f"  {LABELS[col]:<34}{text}\n")
    from loopledger.plugins.analyse.method_compare import comparison_rows

    columns, rows = comparison_rows(ctx, test)
    if rows:
        out.write("\nmethod comparison\n  " + " | ".join(columns) + "\n")
        for row in rows:
            out.write("  " + " | ".join(row) + "\n")


def main(args: argparse.Namespace) -> int:
    from loopledger import report, runner
    from loopledger.commands.check import find_evidence
    from loopledger.commands.run import overrides
    from loopledger.config import ConfigError
    from loopledger.host import get_plugin_manager

    if not args.result_file.is_file():
        raise ConfigError(f"'{args.result_file}' is not a file")
    evidence = args.evidence or find_evidence([args.result_file])
    ctx = runner.run(runner.RunOptions(evidence, files=[args.result_file], overrides=overrides(args)),
                     get_plugin_manager())
    report.print_lines([f for f in ctx.findings if f.severity != "note"], sys.stdout)
    valid = ctx.tests[ctx.tests["valid"].astype(bool)] if len(ctx.tests) else ctx.tests
    if valid.empty or ctx.points.empty:
        sys.stdout.write("loopledger explain: the file could not be judged (see the errors above)\n")
        return runner.exit_code(ctx) or 2
    from loopledger.terminal import VisibleLines

    shown = cast(TextIO, VisibleLines(sys.stdout))  # names, units and inputs quote the file: show them inert
    for test in valid["test"]:
        write(ctx, str(test), shown)
    return runner.exit_code(ctx)


@hookimpl
def ll_cli_commands() -> list[Command]:
    return [Command("explain", "print one result file's calculation trail: budget, TUR, risk, decision",
                    add_arguments, main)]
