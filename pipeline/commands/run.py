"""``loopledger run EVIDENCE_DIR --out OUT``: judge every result file, export tables, publish the handbook."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from loopledger import report, runner
from loopledger.host import get_plugin_manager
from rich.console import Console


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("evidence", type=Path, help="the evidence folder (assets.csv, instruments.yaml, results/)")
    parser.add_argument("--out", type=Path, default=Path("build"), help="output folder (default: ./build)")
    parser.add_argument("--as-of", dest="as_of", help="judge 'overdue' on this date (YYYY-MM-DD)")
    parser.add_argument("--rule", help="decision rule, overriding loopledger.toml")
    parser.add_argument("--no-handbook", action="store_true", help="write data/ only")
    parser.add_argument("--verbose", "-v", action="store_true", help="show every finding")


def overrides(args: argparse.Namespace) -> dict[str, object]:
    out: dict[str, object] = {}
    if getattr(args, "as_of", None):
        out["as_of"] = args.as_of
    if getattr(args, "rule", None):
        out["decision"] = {"rule": args.rule}
    return out


def main(args: argparse.Namespace) -> int:
    console = Console(stderr=False)
    pm = get_plugin_manager()
    opts = runner.RunOptions(args.evidence, overrides=overrides(args),
                             progress=report.progress_factory(Console(stderr=True)))
    ctx = runner.run(opts, pm)
    out = args.out.resolve()
    _guard_out(args.evidence, out)
    runner.export(ctx, out)
    if not args.no_handbook:
        runner.publish(ctx, out)
    report.summary(ctx, console, verbose=args.verbose)
    errors = [f for f in ctx.findings if f.severity == "error"]
    if errors:
        console.print(f"[bold red]{len(errors)} error(s) in the evidence:[/]")
        for f in errors[: 60 if not args.verbose else None]:
            console.print("  " + f.format(), markup=False, highlight=False, soft_wrap=True)
        if len(errors) > 60 and not args.verbose:
            console.print(f"  … {len(errors) - 60} more (use --verbose, or see data/tests.csv)")
    code = runner.exit_code(ctx)
    console.print(f"Tables: {out / 'data'}" + ("" if args.no_handbook else
                                              f"\nHandbook: {out / 'handbook' / 'index.html'}"))
    sys.stdout.flush()
    return code


def _guard_out(evidence: Path, out: Path) -> None:
    from loopledger.config import ConfigError

    ev = evidence.resolve()
    if out == ev or ev in out.parents:
        raise ConfigError(f"--out '{out}' is inside the evidence folder; outputs never go there")
