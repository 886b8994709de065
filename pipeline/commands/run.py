"""``loopledger run EVIDENCE_DIR --out OUT``: judge every result file, export tables, publish the handbook.

Imports stay light at module level: an unchanged rerun is answered from the
cache manifest (:mod:`loopledger.cache.store`) before pandas is ever imported.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from loopledger.cache import store as incremental


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


def outside_evidence(evidence: Path, path: Path, what: str) -> Path:
    """``path`` resolved; a ConfigError when it and the evidence folder overlap: when it is the evidence
    folder, lies inside it or holds it (a run replaces OUT/data and OUT/handbook whole, and tidies the cache
    folder, so an evidence folder there would be deleted). Overlap is judged by the folders' identity on
    disk, so links, ``..`` and file systems that ignore case cannot hide it."""
    from loopledger.config import ConfigError
    from loopledger.files import inside

    ev = evidence.resolve()
    resolved = path.resolve()
    if inside(resolved, ev):
        beside = ev.parent / f"{ev.name}-out"
        raise ConfigError(f"{what} '{resolved}' is inside the evidence folder '{ev}'; outputs never go there "
                          f"(write them beside it, e.g. {what} '{beside}')")
    if inside(ev, resolved):
        raise ConfigError(f"the evidence folder '{ev}' is inside {what} '{resolved}': a run replaces what it "
                          f"writes there whole and would delete the evidence. Name a {what} folder that neither "
                          "holds the evidence folder nor lies inside it")
    if resolved.exists() and not resolved.is_dir():
        raise ConfigError(f"{what} '{path}' is a file; name a folder (it is made if it is not there)")
    return resolved


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


def make_cache(args: argparse.Namespace, command: str, folder: Path | None, writes: Path | None,
               **key: Any) -> incremental.Cache | None:
    """The cache for this invocation, or None (``--no-cache``, or no folder to keep one in)."""
    if getattr(args, "no_cache", False) or folder is None:
        return None
    evidence = args.evidence.resolve()
    folder = outside_evidence(evidence, folder, "--cache")
    full_key = {"command": command, "evidence": str(evidence), "as_of": incremental.effective_as_of(
        evidence, getattr(args, "as_of", None)), "rule": getattr(args, "rule", None),
        "engine": incremental.engine_fingerprint(),
        "follow_links": bool(getattr(args, "follow_links", False)), **key}
    return incremental.Cache(folder, full_key, writes)


def cache_for(args: argparse.Namespace) -> incremental.Cache | None:
    out = out_folder(args)
    return make_cache(args, "run", args.cache or out / incremental.CACHE_NAME, out, out=str(out),
                      handbook=not args.no_handbook, verbose=bool(args.verbose))


def replay(args: argparse.Namespace) -> tuple[int | None, incremental.Cache | None]:
    """The previous run's exit code (its summary reprinted) when nothing changed; else (None, the
    cache looked at, or None)."""
    if not args.evidence.is_dir():
        return None, None
    return replay_with(cache_for(args), args.evidence)


def replay_with(cache: incremental.Cache | None, evidence: Path) -> tuple[int | None, incremental.Cache | None]:
    """(exit code, None) when ``cache`` answers for ``evidence``; else (None, the cache, or None)."""
    if cache is None:
        return None, None
    code = cache.replay(evidence, sys.stdout)
    return (code, None) if code is not None else (None, cache)


def main(args: argparse.Namespace) -> int:
    if not args.evidence.is_dir():
        from loopledger.config import ConfigError

        raise ConfigError(f"evidence folder '{args.evidence}' does not exist")
    from loopledger.lock import DEFAULT_WAIT, exclusive

    cache = cache_for(args)
    wait = DEFAULT_WAIT if args.wait is None else max(0.0, args.wait)
    with exclusive(out_folder(args), sys.stderr.write, wait):
        return cached(args, cache, _full)


def cached(args: argparse.Namespace, cache: incremental.Cache | None,
           full: Callable[[argparse.Namespace, incremental.Cache | None], tuple[int, dict[str, str]]]) -> int:
    """Replay when nothing changed; else forget the manifest, do the ``full`` work and record it.

    When the CLI's quick path already compared this same cache with the evidence folder and found a
    change (``args.looked``), its scan is used rather than done again.
    """
    if cache is not None:
        looked = getattr(args, "looked", None)
        if looked is not None and (looked.folder, looked.key) == (cache.folder, cache.key):
            cache.inputs = looked.inputs
        else:
            code = cache.replay(args.evidence, sys.stdout)
            if code is not None:
                return code
        cache.invalidate()
        if not cache.inputs:  # the replay stopped before scanning (no manifest, or another key)
            cache.inputs = incremental.scan_inputs(args.evidence)  # stats before anything is read
    with incremental.capture_stdout() as tee:
        code, hashes = full(args, cache)
    if cache is not None:
        cache.save(args.evidence, hashes, tee.copy.getvalue(), code)
    return code


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
