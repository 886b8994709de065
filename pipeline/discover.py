"""File selection, in one place: which result files a run reads."""

from __future__ import annotations

import os
import re
import stat
from pathlib import Path

from loopledger.cache.store import REGISTRY_FILES
from loopledger.contracts import SourceFile
from loopledger.files import LinkRefused, evidence_entry, kind
from loopledger.findings import Finding, error, warning

RESULTS_DIR = "results"
RESULT_SUFFIXES = (".yaml", ".yml", ".csv", ".xlsx")


_CONTROL = re.compile(r"[\x00-\x1f\x7f]")


def _bad_name(rel: str) -> bool:
    return _CONTROL.search(rel) is not None


def discover(evidence: Path, follow_links: bool = False) -> tuple[list[SourceFile], list[Finding]]:
    """Every result file under ``evidence/results`` at any depth, sorted.

    ``results/`` itself is checked with ``lstat``: a link there is refused unless ``follow_links``, and then
    followed only to a folder inside the evidence folder (:func:`loopledger.files.evidence_entry`). Links
    under it are never followed (a link could lead outside the evidence folder), and only regular files are
    read: each link, named pipe, socket or device is reported. Hidden files and folders are skipped.
    """
    try:
        root = evidence_entry(evidence, RESULTS_DIR, follow_links, folder=True)
    except LinkRefused as exc:
        return [], [error(str(exc), file=RESULTS_DIR, code="symlink")]
    if root is None:
        return [], [warning(f"no '{RESULTS_DIR}/' folder in the evidence folder", file=RESULTS_DIR)]
    found, findings = _walk(root, RESULTS_DIR)
    found.sort(key=lambda s: s.rel)
    return found, findings


def _walk(root: Path, label: str) -> tuple[list[SourceFile], list[Finding]]:
    """The result files under ``root``, named by their path under ``label`` (``root``'s name in the evidence
    folder, e.g. ``results``; ``root`` itself may be the target of a link followed there)."""
    findings: list[Finding] = []
    found: list[SourceFile] = []
    for dirpath, dirnames, filenames in os.walk(root, followlinks=False):
        here = Path(dirpath)
        inner = os.path.relpath(dirpath, root).replace(os.sep, "/")
        prefix = label if inner == "." else f"{label}/{inner}"
        for name in list(dirnames):
            if name.startswith("."):
                dirnames.remove(name)
            elif (here / name).is_symlink():
                dirnames.remove(name)
                findings.append(error("symbolic link to a folder is not followed; copy the files in instead",
                                      file=f"{prefix}/{name}", code="symlink"))
        for name in filenames:
            if name.startswith("."):
                continue
            path = here / name
            rel = f"{prefix}/{name}"
            if name.startswith("~$"):  # an office program's lock file beside a workbook that is open
                findings.append(warning("a lock file of a workbook open in a spreadsheet program; skipped",
                                        file=rel, code="skipped"))
                continue
            try:
                mode = os.lstat(path).st_mode
            except OSError:  # removed while the folder was read
                continue
            if stat.S_ISLNK(mode):
                findings.append(error("symbolic link is not followed; copy the file in instead",
                                      file=rel, code="symlink"))
                continue
            if not stat.S_ISREG(mode):
                findings.append(error(f"{kind(mode)}, not a regular file: it is not read (replace it with the "
                                      "result file itself)", file=rel, code="special-file"))
                continue
            if path.suffix.lower() not in RESULT_SUFFIXES:
                findings.append(warning(f"not a result file (expected one of {', '.join(RESULT_SUFFIXES)}); "
                                        "skipped", file=rel, code="skipped"))
                continue
            if _bad_name(rel):
                findings.append(error("file name contains control characters; rename it", file=repr(rel)[1:-1],
                                      code="file-name"))
                continue
            found.append(SourceFile(rel, path))
    return found, findings


def select(evidence: Path, paths: list[Path], follow_links: bool = False) -> tuple[list[SourceFile], list[Finding]]:
    """The result files named on a command line: files, or folders searched like ``results/``.

    The evidence folder itself (or any folder above ``results/``) means its
    ``results/``; so does one of its registers (assets.csv, instruments.yaml,
    loopledger.toml), whose change may change any verdict. Other files outside
    ``results/`` are never taken for result files. ``results/`` itself is checked as :func:`discover` does.
    """
    findings: list[Finding] = []
    chosen: dict[str, SourceFile] = {}
    base = evidence.resolve()
    try:
        target = evidence_entry(base, RESULTS_DIR, follow_links, folder=True)
    except LinkRefused as exc:
        return [], [error(str(exc), file=RESULTS_DIR, code="symlink")]
    results = target.resolve() if target is not None else base / RESULTS_DIR

    def under_results(resolved: Path) -> str | None:
        """``resolved``'s name in the evidence folder when it lies in results/ (or is it)."""
        if resolved == results or results in resolved.parents:
            inner = resolved.relative_to(results).as_posix()
            return RESULTS_DIR if inner == "." else f"{RESULTS_DIR}/{inner}"
        return None

    for given in paths:
        resolved = given.resolve() if not given.is_symlink() else given.absolute()
        label = under_results(resolved)
        try:
            rel_path = Path(label) if label is not None else resolved.relative_to(base)
        except ValueError:
            findings.append(error(f"'{given}' is not inside the evidence folder '{evidence}'", file=str(given)))
            continue
        if given.is_symlink():
            findings.append(error("symbolic link is not followed", file=rel_path.as_posix(), code="symlink"))
        elif given.is_dir():
            if label is not None:
                found, more = _walk(resolved, label)
            elif target is not None and (resolved == base or resolved in results.parents):
                found, more = _walk(results, RESULTS_DIR)
            else:
                findings.append(warning(f"no result files here: not under {RESULTS_DIR}/", file=str(given)))
                continue
            findings += more
            chosen.update((s.rel, s) for s in found)
        elif given.is_file():
            rel = rel_path.as_posix()
            if rel in REGISTRY_FILES and target is not None:  # a register changed: any verdict may have changed
                found, more = _walk(results, RESULTS_DIR)
                findings += more
                chosen.update((s.rel, s) for s in found)
                continue
            if label is None:
                findings.append(error(f"not a result file: result files live under {RESULTS_DIR}/", file=rel,
                                      code="not-a-result"))
                continue
            chosen[rel] = SourceFile(rel, given)
        elif given.exists():
            findings.append(error(f"{kind(os.stat(given).st_mode)}, not a regular file: it is not read",
                                  file=rel_path.as_posix(), code="special-file"))
        else:
            findings.append(error("no such file", file=str(given)))
    unique = {f.format(): f for f in findings}
    return sorted(chosen.values(), key=lambda s: s.rel), list(unique.values())
