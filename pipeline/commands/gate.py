"""The commit gate behind ``loopledger check``: which paths belong to which evidence folder, what blocks a
commit, and what a register edit changes.

What blocks (exit 2) is an *invalid* file: a staged result file with an error, a register (assets.csv,
instruments.yaml, loopledger.toml) with an error, or a result file that a staged register edit makes invalid.
A failing test is evidence and is committed with its summary printed; ``--strict`` makes a failure in a
staged result file block too (exit 1). A register edit judges every result file again, under the register as
last committed (``git show HEAD:``) and as staged, and prints each verdict it changes; a file that was
already invalid or failing before the edit blocks nothing.
"""

from __future__ import annotations

import os
import re
import subprocess
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from loopledger.cache.store import REGISTRY_FILES

ASSETS = "assets.csv"  # the registry file that marks an evidence folder (loopledger.registry.ASSETS)

#: the names the hooks hand to the gate: a result file under a results/ folder (its suffix in any case, as
#: discovery reads it), or a register; the same pattern as `files` in .pre-commit-hooks.yaml
_GATED = re.compile(r"(^|/)(results/.+\.([yY][aA]?[mM][lL]|[cC][sS][vV]|[xX][lL][sS][xX])"
                    r"|assets\.csv|instruments\.yaml|loopledger\.toml)$")


def read_paths(source: str) -> list[Path]:
    """The NUL-separated names in ``source`` (``-``: standard input) that the gate checks, as ``git diff -z
    --name-only`` writes them: no name is quoted or split, whatever characters it holds."""
    import sys

    data = sys.stdin.buffer.read() if source == "-" else Path(source).read_bytes()
    names = [os.fsdecode(raw) for raw in data.split(b"\0") if raw]
    return [Path(name) for name in names if _GATED.search(name.replace(os.sep, "/"))]


def evidence_of(path: Path) -> Path | None:
    """The nearest folder at or above ``path`` that holds assets.csv, or None."""
    start = path.absolute()
    for folder in [start, *start.parents]:
        if os.path.lexists(folder / ASSETS):  # of any kind: a link or a named pipe there is reported by the run
            return folder
    return None


def group(paths: list[Path]) -> tuple[dict[Path, list[Path]], list[Path]]:
    """The paths under each one's own evidence folder (in the order first named), and those under none."""
    groups: dict[Path, list[Path]] = {}
    orphans: list[Path] = []
    for path in paths:
        folder = evidence_of(path)
        if folder is None:
            orphans.append(path)
        else:
            groups.setdefault(folder, []).append(path)
    return groups, orphans


def registers_named(evidence: Path, paths: list[Path]) -> list[str]:
    """The registers of ``evidence`` among ``paths`` (their file names)."""
    base = evidence.resolve()
    return sorted({p.name for p in paths if p.name in REGISTRY_FILES and p.resolve().parent == base})


def _git_env() -> dict[str, str]:
    """The environment for git run in another folder: a GIT_DIR a hook was given stays what it means."""
    env = dict(os.environ)
    for name in ("GIT_DIR", "GIT_WORK_TREE", "GIT_INDEX_FILE"):
        if name in env:
            env[name] = os.path.abspath(env[name])
    return env


def committed(evidence: Path, name: str) -> bytes | None:
    """``evidence/name`` as last committed (HEAD), or None (no git, no commit yet, or not in HEAD)."""
    try:
        done = subprocess.run(["git", "show", f"HEAD:./{name}"], cwd=evidence, env=_git_env(),
                              capture_output=True, check=False, timeout=60)
    except (OSError, subprocess.SubprocessError):
        return None
    return done.stdout if done.returncode == 0 else None


@contextmanager
def committed_registers(evidence: Path, names: list[str]) -> Iterator[Path | None]:
    """A folder holding the registers as the run would read them before the staged edit: the named ones
    as in HEAD, the others as they are. None when one of the named is not in HEAD (nothing to compare)."""
    if not names:
        yield None
        return
    before = {name: committed(evidence, name) for name in names}
    if any(before[n] is None for n in names if n != "loopledger.toml"):
        yield None
        return
    with tempfile.TemporaryDirectory(prefix="loopledger-gate-") as tmp:
        folder = Path(tmp)
        for name in REGISTRY_FILES:
            data = before.get(name) if name in names else None
            if data is None and name not in names and (evidence / name).is_file():
                data = (evidence / name).read_bytes()
            if data is not None:
                (folder / name).write_bytes(data)
        yield folder
