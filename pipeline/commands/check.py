"""``loopledger check PATH...``: validate and judge result files or folders, pre-commit style, no handbook.

Folders are searched like ``results/`` (an evidence folder itself means its
``results/``). Each path is checked under its own evidence folder, each folder
once. What blocks a commit is in :mod:`loopledger.commands.gate`. With
``--cache DIR`` an unchanged rerun is answered from the cache manifest without
importing pandas.
"""

from __future__ import annotations

import argparse
import os
import sys
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from loopledger.cache import session
from loopledger.cache import store as incremental
from loopledger.commands import gate

if TYPE_CHECKING:
    from loopledger.findings import Finding


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from loopledger.commands.run import add_cache_arguments

    parser.add_argument("paths", nargs="*", type=Path, help="result files or folders")
    parser.add_argument("--paths-from", dest="paths_from", metavar="FILE",
                        help="also the NUL-separated names in FILE ('-': standard input), as `git diff --cached -z "
                             "--name-only` writes them; names that are not result files or registers are left out")
    parser.add_argument("--strict", action="store_true",
                        help="exit 1 when a test in a named result file fails (without it a failure is printed "
                             "and does not block: it is evidence too)")
    parser.add_argument("--evidence", type=Path,
                        help="the evidence folder (default: the nearest parent of each path holding assets.csv)")
    parser.add_argument("--as-of", dest="as_of", help="judge on this date (YYYY-MM-DD)")
    parser.add_argument("--rule", help="decision rule, overriding loopledger.toml")
    add_cache_arguments(parser, default="none: check keeps no cache unless given one")


def find_evidence(paths: list[Path]) -> Path:
    from loopledger.config import ConfigError

    found = gate.evidence_of(paths[0].resolve())
    if found is None:
        raise ConfigError(f"no {gate.ASSETS} above '{paths[0]}': name the evidence folder with --evidence")
    return found


def cache_for(args: argparse.Namespace) -> incremental.Cache | None:
    args.evidence = args.evidence or find_evidence(args.paths)
    paths = sorted(str(p.resolve()) for p in args.paths)
    return session.open_cache(args, "check", args.cache, None, paths=paths, strict=bool(args.strict),
                      label=_label(args.evidence))


def replay(args: argparse.Namespace) -> tuple[int | None, incremental.Cache | None]:
    """As :func:`loopledger.commands.run.replay`; ``check`` keeps a cache only when ``--cache`` names one, and
    only for paths in one evidence folder naming no register (a register's edit is compared with what is
    committed, which the cache does not see)."""
    if args.cache is None or args.no_cache or args.paths_from or not args.paths:
        return None, None
    try:
        groups, orphans = gate.group(args.paths) if args.evidence is None else ({args.evidence: args.paths}, [])
        if orphans or len(groups) != 1 or any(gate.registers_named(ev, ps) for ev, ps in groups.items()):
            return None, None
        cache = cache_for(args)
    except Exception:  # let the full path report it properly
        return None, None
    return session.replay_with(cache, args.evidence)


def main(args: argparse.Namespace) -> int:
    from loopledger.config import ConfigError

    paths = list(args.paths) + (gate.read_paths(args.paths_from) if args.paths_from else [])
    if not paths:
        if args.paths_from is None:
            raise ConfigError("name the result files or folders to check")
        return 0  # nothing staged that the gate looks at
    groups, orphans = gate.group(paths) if args.evidence is None else ({args.evidence: paths}, [])
    for path in orphans:
        sys.stderr.write(f"loopledger: no {gate.ASSETS} above '{path}': name the evidence folder with --evidence\n")
    if len(groups) == 1 and not orphans:
        args.evidence, args.paths = next(iter(groups.items()))
        return session.cached(args, cache_for(args) if args.cache is not None else None, _full)
    codes = [3] if orphans else []
    for evidence, named in groups.items():
        codes.append(judge(args, evidence, named, label=os.path.relpath(evidence))[0])
    return max(codes)


def _label(evidence: Path) -> str:
    """The evidence folder as seen from the current folder when it lies below it (a repository's top, where
    hooks run), so each path printed names its file from there; else nothing (paths under the folder)."""
    here, folder = Path.cwd().resolve(), evidence.resolve()
    return folder.relative_to(here).as_posix() if here in folder.parents else ""


def _full(args: argparse.Namespace, cache: incremental.Cache | None) -> tuple[int, dict[str, str]]:
    return judge(args, args.evidence, args.paths, label=_label(args.evidence), cache=cache)


def judge(args: argparse.Namespace, evidence: Path, paths: list[Path], label: str,
          cache: incremental.Cache | None = None) -> tuple[int, dict[str, str]]:
    """Check ``paths`` in one evidence folder; print the findings, any verdicts a register edit changes and a
    summary line, each path prefixed by ``label`` (the folder, when several are checked or it lies below the
    current folder); return the exit code."""
    from loopledger import discover, keys, report, runner
    from loopledger.commands.run import overrides
    from loopledger.findings import sort_findings
    from loopledger.host import get_plugin_manager

    registers = gate.registers_named(evidence, paths)
    results = [p for p in paths if p.name not in registers or p.resolve().parent != evidence.resolve()]
    named = {s.rel for s in discover.select(evidence, results, args.follow_links)[0]}
    parsed = cache.load_parsed() if cache is not None else None
    ctx = runner.run(runner.RunOptions(evidence, files=list(paths), overrides=overrides(args), parsed=parsed,
                                       follow_links=args.follow_links,
                                       save_parsed=cache.save_parsed if cache is not None else None),
                     get_plugin_manager())
    before = _verdicts_before(args, evidence, paths, registers, parsed)
    after = dict(zip(ctx.tests["source_file"], ctx.tests["verdict"], strict=True)) if len(ctx.tests) else {}
    register_only = set(after) - named

    def blocks(f: Finding) -> bool:
        if f.file not in register_only:
            return True
        return before is not None and before.get(f.file, "invalid") != "invalid"  # made invalid by the edit

    findings = [_relabel(f, args.strict and f.file in named) for f in
                sort_findings([*ctx.findings, *report.point_findings(ctx)]) if f.severity != "note"]
    blocking = any(f.severity == "error" and blocks(f) for f in ctx.findings)
    failing = [rel for rel in named if after.get(rel) == "fail"]
    where = f"{label}/" if label else ""
    report.print_lines([replace(f, file=where + f.file) if f.file and where else f for f in findings], sys.stdout)
    if ctx.stash.get(keys.DECISION_NOTE):
        sys.stdout.write(f"note: {ctx.stash[keys.DECISION_NOTE]}\n")
    if before is not None:
        from loopledger.terminal import visible

        for rel in sorted(after):
            if rel in before and before[rel] != after[rel]:
                sys.stdout.write(visible(f"{where}{rel}: verdict {before[rel]} -> {after[rel]} with the staged "
                                         f"{', '.join(registers)}") + "\n")
    elif registers:
        sys.stdout.write(f"loopledger check: {', '.join(registers)} not committed before (or not in git): "
                         "verdict changes not compared\n")
    report.print_failures(ctx, sys.stdout)
    n = len(ctx.tests)
    invalid = int((~ctx.tests["valid"].astype(bool)).sum()) if n else 0
    fails = int((ctx.tests.get("verdict") == "fail").sum()) if n else 0
    note = "" if not failing or args.strict else " (a failure is evidence: committed, not blocked; --strict blocks)"
    sys.stdout.write(f"loopledger check: {where}{' ' if where else ''}{n} file(s), {fails} failing, "
                     f"{invalid} invalid{note}\n")
    code = 2 if blocking else 1 if args.strict and failing else 0
    return code, runner.file_hashes(ctx)


def _relabel(f: Finding, blocking_failure: bool) -> Finding:
    """A failing point's finding as a warning unless it blocks (``--strict``, a named file)."""
    if f.code == "judgement" and f.severity == "error" and not blocking_failure:
        return replace(f, severity="warning")
    return f


def _verdicts_before(args: argparse.Namespace, evidence: Path, paths: list[Path], registers: list[str],
                     parsed: dict[tuple[str, str], Any] | None) -> dict[str, str] | None:
    """Each result file's verdict under the registers as last committed, when a register is named and
    git has them; else None."""
    from loopledger import runner
    from loopledger.commands.run import overrides
    from loopledger.config import ConfigError
    from loopledger.host import get_plugin_manager

    with gate.committed_registers(evidence, registers) as folder:
        if folder is None:
            return None
        try:
            ctx = runner.run(runner.RunOptions(evidence, files=list(paths), overrides=overrides(args),
                                               parsed=parsed, registers=folder), get_plugin_manager())
        except ConfigError:
            return None
    return dict(zip(ctx.tests["source_file"], ctx.tests["verdict"], strict=True)) if len(ctx.tests) else {}
