"""Writing outputs atomically: a file via a temporary file, a folder via a staging folder.

A run killed at any moment leaves every output either as the previous run
wrote it or as this run wrote it, never half-written: files are renamed into
place, and folders are swapped whole (on Linux with an atomic exchange of the
two names; elsewhere with two renames and a recovery of the old folder on the
next run if the process died between them).
"""

from __future__ import annotations

import contextlib
import os
import shutil
import sys
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import pandas as pd

_UMASK: int | None = None


def _public_mode() -> int:
    """0o666 less the process umask: what an ordinary ``open()`` would have given (mkstemp gives 0o600)."""
    global _UMASK
    if _UMASK is None:
        _UMASK = os.umask(0)
        os.umask(_UMASK)
    return 0o666 & ~_UMASK


def write_bytes(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and ``os.replace``."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, _public_mode())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_csv(path: Path, frame: pd.DataFrame) -> None:
    write_bytes(path, frame.to_csv(index=False, lineterminator="\n", float_format="%.10g").encode("utf-8"))


def _exchange(a: Path, b: Path) -> bool:
    """Swap two paths in one atomic step (Linux renameat2 RENAME_EXCHANGE); False where unsupported."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2
    return int(fn(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange)) == 0


def recover(final: Path) -> None:
    """Put back ``final`` from ``.final.old`` if a run died between the two renames of a swap."""
    old = final.parent / f".{final.name}.old"
    if old.is_dir() and not final.exists():
        os.replace(old, final)


@contextlib.contextmanager
def staged_dir(final: Path) -> Iterator[Path]:
    """Yield a staging folder beside ``final``; on success swap it into place.

    If the body raises (or the process dies), ``final`` is left as it was.
    """
    final.parent.mkdir(parents=True, exist_ok=True)
    recover(final)
    stage = Path(tempfile.mkdtemp(prefix=f".{final.name}.new-", dir=final.parent))
    try:
        yield stage
        os.chmod(stage, 0o777 & ~(0o666 & ~_public_mode()))  # mkdtemp gives 0o700
    except BaseException:
        shutil.rmtree(stage, ignore_errors=True)
        raise
    if final.exists() and _exchange(stage, final):
        shutil.rmtree(stage, ignore_errors=True)  # now holds the previous outputs
        return
    old = final.parent / f".{final.name}.old"
    if old.exists():
        shutil.rmtree(old)
    if final.exists():
        os.replace(final, old)
    os.replace(stage, final)
    shutil.rmtree(old, ignore_errors=True)
