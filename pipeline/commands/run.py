"""``loopledger run EVIDENCE_DIR --out OUT``: judge every result file, export tables, publish the handbook.

Imports stay light at module level: an unchanged rerun is answered from the
cache manifest (:mod:`loopledger.cache.store`) before pandas is ever imported.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from loopledger.cache import session
from loopledger.cache import store as incremental
from loopledger.files import outside_evidence


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("evidence", type=Path, help="the evidence folder (assets.csv, instruments.yaml, results/)")
    parser.add_argument("--out", type=Path, help="output folder (default: ./build, or EVIDENCE-build beside the "
                        "evidence folder when ./build would be inside it)")
    parser.add_argument("--as-of", dest="as_of", help="judge 'overdue' on this date (YYYY-MM-DD)")
    parser.add_argument("--rule", help="decision rule, overriding loopledger.toml")
    parser.add_argument("--no-handbook", action="store_true", help="write data/ only")
    parser.add_argument("--verbose", "-v", action="store_true", help="show every finding")
    parser.add_argument("--wait", type=float, default=None, metavar="SECONDS",
                        help="how long to wait for another run writing to OUT (default: 600)")
    add_cache_arguments(parser, default="OUT/.loopledger-cache")


def add_cache_arguments(parser: argparse.ArgumentParser, default: str) -> None:
    parser.add_argument("--follow-links", dest="follow_links", action="store_true",
                        help="follow a symbolic link at results/, assets.csv, instruments.yaml or loopledger.toml "
                             "when it points inside the evidence folder (refused otherwise)")
    parser.add_argument("--cache", type=Path, metavar="DIR",
                        help=f"folder for the incremental-run cache (default: {default}; never inside the "
                             "evidence folder)")
    parser.add_argument("--no-cache", dest="no_cache", action="store_true",
                        help="read and judge everything; neither use nor write the cache")


def overrides(args: argparse.Namespace) -> dict[str, object]:
    out: dict[str, object] = {}
    if getattr(args, "as_of", None):
        out["as_of"] = args.as_of
    if getattr(args, "rule", None):
        out["decision"] = {"rule": args.rule}
    return out


def out_folder(args: argparse.Namespace) -> Path:
    """The output folder: ``--out``, else ./build, else (./build inside the evidence folder, as after
    ``cd EVIDENCE; loopledger run .``) a folder named after the evidence folder beside it."""
    if args.out is not None:
        return outside_evidence(args.evidence, args.out, "--out")
    ev = args.evidence.resolve()
    build = Path("build").resolve()
    if build == ev or ev in build.parents:
        return outside_evidence(ev, ev.parent / f"{ev.name}-build", "--out")
    return outside_evidence(ev, build, "--out")


def cache_for(args: argparse.Namespace) -> incremental.Cache | None:
    out = out_folder(args)
    return session.open_cache(args, "run", args.cache or out / incremental.CACHE_NAME, out, out=str(out),
                      handbook=not args.no_handbook, verbose=bool(args.verbose))


def replay(args: argparse.Namespace) -> tuple[int | None, incremental.Cache | None]:
    """The previous run's exit code (its summary reprinted) when nothing changed; else (None, the
    cache looked at, or None)."""
    if not args.evidence.is_dir():
        return None, None
    return session.replay_with(cache_for(args), args.evidence)


def main(args: argparse.Namespace) -> int:
    if not args.evidence.is_dir():
        from loopledger.config import ConfigError

        raise ConfigError(f"evidence folder '{args.evidence}' does not exist")
    from loopledger.lock import DEFAULT_WAIT, exclusive

    cache = cache_for(args)
    wait = DEFAULT_WAIT if args.wait is None else max(0.0, args.wait)
    with exclusive(out_folder(args), sys.stderr.write, wait):
        return session.cached(args, cache, _full)


def _full(args: argparse.Namespace, cache: incremental.Cache | None) -> tuple[int, dict[str, str]]:
    from loopledger import report, runner
    from loopledger.host import get_plugin_manager
    from rich.console import Console

    console = Console(stderr=False, width=None if sys.stdout.isatty() else 120)
    pm = get_plugin_manager()
    out = out_folder(args)
    parsed = cache.load_parsed() if cache is not None else None
    opts = runner.RunOptions(args.evidence, overrides=overrides(args), follow_links=args.follow_links,
                             progress=report.progress_factory(Console(stderr=True)), parsed=parsed,
                             save_parsed=cache.save_parsed if cache is not None else None, previous_out=out)
    ctx = runner.run(opts, pm)
    if args.no_cache:
        from loopledger import keys

        ctx.stash[keys.REBUILD_ALL] = True
        ctx.fleet_only.add(keys.REBUILD_ALL.name)  # how the pages are made, not what is on them: no digest
    if args.no_handbook:
        runner.export(ctx, out)
    else:
        runner.export_and_publish(ctx, out)
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
    return code, runner.file_hashes(ctx)
