"""One command's use of the cache: open it under the command's key, answer from it when nothing changed,
and otherwise do the full work and record it.

``run`` and ``check`` share these; each names what goes into its key (see :func:`open_cache`). Standard
library only at module level, like :mod:`loopledger.cache.store`: the no-change replay must not import
pandas.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from loopledger import files
from loopledger.cache import store

Full = Callable[[argparse.Namespace, "store.Cache | None"], tuple[int, dict[str, str]]]


def open_cache(args: argparse.Namespace, command: str, folder: Path | None, writes: Path | None,
               **key: Any) -> store.Cache | None:
    """The cache for this invocation, or None (``--no-cache``, or no folder to keep one in)."""
    if getattr(args, "no_cache", False) or folder is None:
        return None
    evidence = args.evidence.resolve()
    folder = files.outside_evidence(evidence, folder, "--cache")
    full_key = {"command": command, "evidence": str(evidence), "as_of": store.effective_as_of(
        evidence, getattr(args, "as_of", None)), "rule": getattr(args, "rule", None),
        "engine": store.engine_fingerprint(),
        "follow_links": bool(getattr(args, "follow_links", False)), **key}
    return store.Cache(folder, full_key, writes)


def replay_with(cache: store.Cache | None, evidence: Path) -> tuple[int | None, store.Cache | None]:
    """(exit code, None) when ``cache`` answers for ``evidence``; else (None, the cache, or None)."""
    if cache is None:
        return None, None
    code = cache.replay(evidence, sys.stdout)
    return (code, None) if code is not None else (None, cache)


def cached(args: argparse.Namespace, cache: store.Cache | None,
           full: Full) -> int:
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
            cache.inputs = store.scan_inputs(args.evidence)  # stats before anything is read
    with store.capture_stdout() as tee:
        code, hashes = full(args, cache)
    if cache is not None:
        cache.save(args.evidence, hashes, tee.copy.getvalue(), code)
    return code
