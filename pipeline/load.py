"""Read every selected result file into two tables: tests (one row per file) and points."""

from __future__ import annotations

import hashlib
import os
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import Any

import pandas as pd
from loopledger import keys
from loopledger.contracts import SourceFile
from loopledger.findings import Finding, error, warning

HEADER_FIELDS = ("asset", "date", "technician", "connection", "method", "injection", "ambient_c",
                 "source", "meter", "shunt", "remarks", "cjc_c", "cjc_u", "cjc_probe")
POINT_FIELDS = ("input", "reading", "readings", "reading_min", "reading_max", "direction")
TEST_COLUMNS = ("test", "source_file", "sha256", "valid", *HEADER_FIELDS)
POINT_COLUMNS = ("test", "source_file", "line", "phase", "point", *POINT_FIELDS)


def test_id(rel: str) -> str:
    """A test is named by its file's path under results/, without the suffix."""
    stem = rel.split("/", 1)[1] if rel.startswith("results/") else rel
    return stem.rsplit(".", 1)[0] if "." in stem.rsplit("/", 1)[-1] else stem


def test_ids(rels: list[str]) -> tuple[list[str], list[Finding]]:
    """:func:`test_id` of each file, made unique: files named alike but for their extension
    (``x.yaml`` and ``x.csv``) keep it in their test's name, and each gets a warning naming the other."""
    ids = [test_id(rel) for rel in rels]
    sharing: dict[str, list[str]] = {}
    for rel, ident in zip(rels, ids, strict=True):
        sharing.setdefault(ident, []).append(rel)
    findings: list[Finding] = []
    for i, rel in enumerate(rels):
        alike = sharing[ids[i]]
        if len(alike) > 1:
            ids[i] = rel.split("/", 1)[1] if rel.startswith("results/") else rel
            others = [r for r in alike if r != rel]
            said = "has the same name but for its" if len(others) == 1 else "have the same name but for their"
            findings.append(warning(f"{', '.join(others)} {said} extension: this test is listed as '{ids[i]}'; "
                                    "keep one file per test", file=rel, code="same-name"))
    seen: dict[str, int] = {}
    for i, ident in enumerate(ids):  # a name with its extension could still match another's without
        seen[ident] = seen.get(ident, 0) + 1
        if seen[ident] > 1:
            ids[i] = f"{ident}#{seen[ident]}"
    return ids, findings


def read_bounded(path: Path, limit: int) -> bytes:
    """The file's bytes, refusing (ValueError) a file over ``limit`` bytes without reading it all, and
    anything but a regular file without blocking on it (:func:`loopledger.files.read_regular`)."""
    from loopledger.files import read_regular

    return read_regular(path, limit)


#: parse in worker processes only when at least this many files are new (process start-up costs)
PARALLEL_MIN = 400

_PARSING: tuple[Any, dict[str, int]] | None = None  # (plugin manager, limits), handed to forked workers


def _parse_one(source: SourceFile) -> tuple[bytes | None, str, Any, str]:
    """(bytes, sha256, ResultRead or None, what went wrong) for one file; run in a forked worker."""
    assert _PARSING is not None
    pm, limits = _PARSING
    try:
        data = read_bounded(source.path, int(limits["max_file_bytes"]))
    except (OSError, ValueError) as exc:
        return None, "", None, str(exc)
    sha = hashlib.sha256(data).hexdigest()
    try:
        return data, sha, pm.hook.ll_read_result(path=source.path, rel=source.rel, data=data, limits=limits), ""
    except Exception as exc:  # reported by the caller as a reader bug, as in the serial path
        return data, sha, None, f"{type(exc).__name__}: {exc}"


def parse_ahead(ctx: Any, files: list[SourceFile], workers: int | None = None) -> dict[str, Any]:
    """Read and parse many files over the machine's cores (forked workers share the plugins without
    copying); {rel: result of :func:`_parse_one`}. Empty when too few files or fork is not offered."""
    from loopledger.cache.forking import can_fork, fork_pool

    global _PARSING
    workers = workers if workers is not None else (os.cpu_count() or 1)
    if workers < 2 or len(files) < PARALLEL_MIN or not can_fork():
        return {}
    _PARSING = (ctx.pm, dict(ctx.config["limits"]))
    try:
        with fork_pool(workers) as pool:
            done = pool.map(_parse_one, files, chunksize=max(1, len(files) // (workers * 8)))
            return {f.rel: r for f, r in zip(files, done, strict=True)}
    finally:
        _PARSING = None


def read_files(ctx: Any, files: Iterable[SourceFile],
               progress: Callable[[int], None] | None = None,
               parsed: dict[tuple[str, str], Any] | None = None) -> list[Finding]:
    """Fill ``ctx.tests`` and ``ctx.points`` from ``files``; return the findings met on the way.

    ``parsed`` (the incremental cache) maps (path, sha256) to a file already
    read; a file found there is not parsed again. On return it holds exactly
    the files of this run.
    """
    previous = dict(parsed) if parsed is not None else {}
    kept: dict[tuple[str, str], Any] = {}
    limits = ctx.config["limits"]
    tests: list[dict[str, Any]] = []
    points: list[dict[str, Any]] = []
    header_lines: dict[str, dict[str, int]] = {}
    files = list(files)
    known = {rel for rel, _sha in previous}
    ahead = parse_ahead(ctx, [f for f in files if f.rel not in known])
    ids, findings = test_ids([f.rel for f in files])
    for source, ident in zip(files, ids, strict=True):
        row: dict[str, Any] = {"test": ident, "source_file": source.rel, "sha256": "", "valid": True}
        tests.append(row)
        if progress:
            progress(1)
        early = ahead.get(source.rel)
        if early is not None:
            data, row["sha256"], read, problem = early
        else:
            try:
                data, problem = read_bounded(source.path, int(limits["max_file_bytes"])), ""
            except (OSError, ValueError) as exc:
                data, problem = None, str(exc)
            row["sha256"] = hashlib.sha256(data).hexdigest() if data is not None else ""
            read = None
        if data is None:
            findings.append(error(f"cannot read: {problem}", file=source.rel, code="unreadable"))
            row["valid"] = False
            continue
        ctx.raw_files[source.rel] = data
        key = (source.rel, row["sha256"])
        try:
            if early is None:
                read = previous.get(key)
                if read is None:
                    read = ctx.pm.hook.ll_read_result(path=source.path, rel=source.rel, data=data, limits=limits)
        except Exception as exc:  # a reader plugin's bug must not stop the other files
            problem = f"{type(exc).__name__}: {exc}"
        if problem:
            findings.append(error(f"the reader failed on this file ({problem}); this is a bug in a reader plugin, "
                                  "please report it", file=source.rel, code="reader"))
            row["valid"] = False
            continue
        if read is not None:
            kept[key] = read
        if read is None:
            findings.append(error("no plugin reads this kind of file", file=source.rel, code="format"))
            row["valid"] = False
            continue
        findings.extend(read.findings)
        # an unknown key leaves the rest of the file readable: its points are still checked, so every mistake
        # of the file is reported in one pass; the check stage then marks the file invalid
        if any(f.severity == "error" and f.code != "unknown-key" for f in read.findings):
            row["valid"] = False
        for name in HEADER_FIELDS:
            row[name] = read.header.get(name)
        header_lines[source.rel] = read.header_lines
        if _remarks_too_long(row, limits["max_remarks_bytes"], source.rel, read.header_lines, findings):
            continue
        if len(read.points) > limits["max_points"]:
            findings.append(error(f"{len(read.points)} points is over the limit of {limits['max_points']} "
                                  "(limits.max_points)", file=source.rel, code="too-many"))
            row["valid"] = False
            continue
        repeats = [p for p in read.points if len(p.get("readings") or ()) > limits["max_repeats"]]
        if repeats:
            findings += [error(f"{len(p['readings'])} repeat readings is over the limit of {limits['max_repeats']} "
                               "(limits.max_repeats)", file=source.rel, line=int(p.get("line") or 0),
                               point=f"{p.get('phase')} #{p.get('point')}", field="readings", code="too-many")
                         for p in repeats]
            row["valid"] = False
            continue
        for point in read.points:
            points.append({"test": row["test"], "source_file": source.rel,
                           **{k: point.get(k) for k in ("line", "phase", "point", *POINT_FIELDS)}})
    if parsed is not None:
        parsed.clear()
        parsed.update(kept)
    ctx.tests = pd.DataFrame(tests, columns=list(TEST_COLUMNS))
    ctx.points = pd.DataFrame(points, columns=list(POINT_COLUMNS))
    ctx.stash[keys.HEADER_LINES] = header_lines
    bad = set(ctx.tests.loc[~ctx.tests["valid"].astype(bool), "source_file"])
    ctx.points = ctx.points[~ctx.points["source_file"].isin(bad)].reset_index(drop=True)
    return findings


def _remarks_too_long(row: dict[str, Any], limit: int, rel: str, lines: dict[str, int],
                      findings: list[Finding]) -> bool:
    """True (the file invalid, an error said with the length) when the remarks are over ``limit`` UTF-8 bytes;
    they are then left out of the run, so the handbook never renders them (the test page still carries the
    file whole)."""
    remarks = row.get("remarks")
    size = len(remarks.encode("utf-8", "surrogatepass")) if isinstance(remarks, str) else 0
    if size <= limit:
        return False
    findings.append(error(f"remarks are {size} bytes long, over the limit of {limit} (limits.max_remarks_bytes): "
                          "shorten them, or keep long notes in a file of their own", file=rel,
                          line=lines.get("remarks", 0), field="remarks", code="too-long"))
    row["remarks"] = None
    row["valid"] = False
    return True
