"""File selection, in one place: which result files a run reads."""

from __future__ import annotations

import os
import re
from pathlib import Path

from loopledger.cache.store import REGISTRY_FILES
from loopledger.contracts import SourceFile
from loopledger.findings import Finding, error, warning

RESULTS_DIR = "results"
RESULT_SUFFIXES = (".yaml", ".yml", ".csv", ".xlsx")


_CONTROL = re.compile(r"[\x00-\x1f\x7f]")


def _bad_name(rel: str) -> bool:
    return _CONTROL.search(rel) is not None


def discover(evidence: Path) -> tuple[list[SourceFile], list[Finding]]:
    """Every result file under ``evidence/results`` at any depth, sorted.

    Symbolic links are never followed (a link could lead outside the evidence
    folder); each one is reported. Hidden files and folders are skipped.
    """
    root = evidence / RESULTS_DIR
    if not root.is_dir():
        return [], [warning(f"no '{RESULTS_DIR}/' folder in the evidence folder", file=RESULTS_DIR)]
    found, findings = _walk(root, evidence)
    found.sort(key=lambda s: s.rel)
    return found, findings


def _walk(root: Path, evidence: Path) -> tuple[list[SourceFile], list[Finding]]:
    findings: list[Finding] = []
    found: list[SourceFile] = []
    for dirpath, dirnames, filenames in os.walk(root, followlinks=False):
        here = Path(dirpath)
        for name in list(dirnames):
            if name.startswith("."):
                dirnames.remove(name)
            elif (here / name).is_symlink():
                dirnames.remove(name)
                rel = (here / name).relative_to(evidence).as_posix()
                findings.append(error("symbolic link to a folder is not followed; copy the files in instead",
                                      file=rel, code="symlink"))
        for name in filenames:
            if name.startswith("."):
                continue
            path = here / name
            rel = path.relative_to(evidence).as_posix()
            if name.startswith("~$"):  # an office program's lock file beside a workbook that is open
                findings.append(warning("a lock file of a workbook open in a spreadsheet program; skipped",
                                        file=rel, code="skipped"))
                continue
            if path.is_symlink():
                findings.append(error("symbolic link is not followed; copy the file in instead",
                                      file=rel, code="symlink"))
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


def select(evidence: Path, paths: list[Path]) -> tuple[list[SourceFile], list[Finding]]:
    """The result files named on a command line: files, or folders searched like ``results/``.

    The evidence folder itself (or any folder above ``results/``) means its
    ``results/``; so does one of its registers (assets.csv, instruments.yaml,
    loopledger.toml), whose change may change any verdict. Other files outside
    ``results/`` are never taken for result files.
    """
    findings: list[Finding] = []
    chosen: dict[str, SourceFile] = {}
    base = evidence.resolve()
    results = base / RESULTS_DIR
    for given in paths:
        resolved = given.resolve() if not given.is_symlink() else given.absolute()
        try:
            rel_path = resolved.relative_to(base)
        except ValueError:
            findings.append(error(f"'{given}' is not inside the evidence folder '{evidence}'", file=str(given)))
            continue
        if given.is_symlink():
            findings.append(error("symbolic link is not followed", file=rel_path.as_posix(), code="symlink"))
        elif given.is_dir():
            if resolved == results or results in resolved.parents:
                root = resolved
            elif resolved in results.parents and results.is_dir():
                root = results
            else:
                findings.append(warning(f"no result files here: not under {RESULTS_DIR}/", file=str(given)))
                continue
            found, more = _walk(root, base)
            findings += more
            chosen.update((s.rel, s) for s in found)
        elif given.is_file():
            rel = rel_path.as_posix()
            if rel in REGISTRY_FILES and results.is_dir():  # a register changed: any verdict may have changed with it
                found, more = _walk(results, base)
                findings += more
                chosen.update((s.rel, s) for s in found)
                continue
            if not rel.startswith(RESULTS_DIR + "/"):
                findings.append(error(f"not a result file: result files live under {RESULTS_DIR}/", file=rel,
                                      code="not-a-result"))
                continue
            chosen[rel] = SourceFile(rel, given)
        else:
            findings.append(error("no such file", file=str(given)))
    unique = {f.format(): f for f in findings}
    return sorted(chosen.values(), key=lambda s: s.rel), list(unique.values())
