"""Writing outputs atomically: a file via a temporary file, a folder via a staging folder."""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

import pandas as pd


def write_bytes(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and ``os.replace``."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_csv(path: Path, frame: pd.DataFrame) -> None:
    write_bytes(path, frame.to_csv(index=False, lineterminator="\n", float_format="%.10g").encode("utf-8"))


@contextlib.contextmanager
def staged_dir(final: Path) -> Iterator[Path]:
    """Yield a staging folder beside ``final``; on success swap it into place.

    If the body raises (or the process dies), ``final`` is left as it was.
    """
    final.parent.mkdir(parents=True, exist_ok=True)
    stage = Path(tempfile.mkdtemp(prefix=f".{final.name}.new-", dir=final.parent))
    try:
        yield stage
    except BaseException:
        shutil.rmtree(stage, ignore_errors=True)
        raise
    old = final.parent / f".{final.name}.old"
    if old.exists():
        shutil.rmtree(old)
    if final.exists():
        os.replace(final, old)
    os.replace(stage, final)
    shutil.rmtree(old, ignore_errors=True)
