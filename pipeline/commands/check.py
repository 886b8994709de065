"""``loopledger check FILE...``: validate and judge result files, pre-commit style, no handbook."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from loopledger import report, runner
from loopledger.config import ConfigError
from loopledger.findings import sort_findings
from loopledger.host import get_plugin_manager
from loopledger.registry import ASSETS


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("paths", nargs="+", type=Path, help="result files or folders")
    parser.add_argument("--evidence", type=Path,
                        help="the evidence folder (default: the nearest parent holding assets.csv)")
    parser.add_argument("--as-of", dest="as_of", help="judge on this date (YYYY-MM-DD)")
    parser.add_argument("--rule", help="decision rule, overriding loopledger.toml")


def find_evidence(paths: list[Path]) -> Path:
    start = paths[0].resolve()
    for folder in [start, *start.parents]:
        if (folder / ASSETS).is_file():
            return folder
    raise ConfigError(f"no {ASSETS} above '{paths[0]}': name the evidence folder with --evidence")


def main(args: argparse.Namespace) -> int:
    from loopledger.commands.run import overrides

    evidence = args.evidence or find_evidence(args.paths)
    pm = get_plugin_manager()
    ctx = runner.run(runner.RunOptions(evidence, files=list(args.paths), overrides=overrides(args)), pm)
    findings = sort_findings([*ctx.findings, *report.point_findings(ctx)])
    report.print_lines([f for f in findings if f.severity != "note"], sys.stdout)
    code = runner.exit_code(ctx)
    n = len(ctx.tests)
    sys.stdout.write(f"loopledger check: {n} file(s), "
                     f"{int((ctx.tests.get('verdict') == 'fail').sum()) if n else 0} failing, "
                     f"{int((~ctx.tests['valid'].astype(bool)).sum()) if n else 0} invalid\n")
    return code
