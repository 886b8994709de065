"""``loopledger check PATH...``: validate and judge result files or folders, pre-commit style, no handbook.

Folders are searched like ``results/`` (an evidence folder itself means its
``results/``). With ``--cache DIR`` an unchanged rerun is answered from the
cache manifest without importing pandas.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from loopledger.cache import store as incremental

ASSETS = "assets.csv"  # the registry file that marks an evidence folder (loopledger.registry.ASSETS)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from loopledger.commands.run import add_cache_arguments

    parser.add_argument("paths", nargs="+", type=Path, help="result files or folders")
    parser.add_argument("--evidence", type=Path,
                        help="the evidence folder (default: the nearest parent holding assets.csv)")
    parser.add_argument("--as-of", dest="as_of", help="judge on this date (YYYY-MM-DD)")
    parser.add_argument("--rule", help="decision rule, overriding loopledger.toml")
    add_cache_arguments(parser, default="none: check keeps no cache unless given one")


def find_evidence(paths: list[Path]) -> Path:
    from loopledger.config import ConfigError

    start = paths[0].resolve()
    for folder in [start, *start.parents]:
        if (folder / ASSETS).is_file():
            return folder
    raise ConfigError(f"no {ASSETS} above '{paths[0]}': name the evidence folder with --evidence")


def cache_for(args: argparse.Namespace) -> incremental.Cache | None:
    from loopledger.commands.run import make_cache

    args.evidence = args.evidence or find_evidence(args.paths)
    paths = sorted(str(p.resolve()) for p in args.paths)
    return make_cache(args, "check", args.cache, [], paths=paths)


def replay(args: argparse.Namespace) -> tuple[int | None, incremental.Cache | None]:
    """As :func:`loopledger.commands.run.replay`; ``check`` keeps a cache only when ``--cache`` names one."""
    if args.cache is None or args.no_cache:
        return None, None
    from loopledger.commands.run import replay_with

    try:
        cache = cache_for(args)
    except Exception:  # let the full path report it properly
        return None, None
    return replay_with(cache, args.evidence)


def main(args: argparse.Namespace) -> int:
    from loopledger.commands.run import cached

    return cached(args, cache_for(args), _full)


def _full(args: argparse.Namespace, cache: incremental.Cache | None) -> tuple[int, dict[str, str]]:
    from loopledger import report, runner
    from loopledger.commands.run import overrides
    from loopledger.findings import sort_findings
    from loopledger.host import get_plugin_manager

    pm = get_plugin_manager()
    parsed = cache.load_parsed() if cache is not None else None
    ctx = runner.run(runner.RunOptions(args.evidence, files=list(args.paths), overrides=overrides(args),
                                       parsed=parsed, save_parsed=cache.save_parsed if cache is not None else None),
                     pm)
    findings = sort_findings([*ctx.findings, *report.point_findings(ctx)])
    report.print_lines([f for f in findings if f.severity != "note"], sys.stdout)
    code = runner.exit_code(ctx)
    n = len(ctx.tests)
    sys.stdout.write(f"loopledger check: {n} file(s), "
                     f"{int((ctx.tests.get('verdict') == 'fail').sum()) if n else 0} failing, "
                     f"{int((~ctx.tests['valid'].astype(bool)).sum()) if n else 0} invalid\n")
    return code, runner.file_hashes(ctx)
