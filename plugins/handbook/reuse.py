"""Writing pages into the staging folder, and reusing the live site's pages only when they are intact.

A page is reused (not rendered again) only when the live site still holds it exactly as the last build
wrote it: its SHA-256 is checked against the one the site's manifest records. A page edited, emptied or
replaced by hand in ``OUT/handbook`` is rendered again, and the build names it.

Pages are written read-only. A reused page is hard-linked into the new site (no copy) only where this
process cannot write the live page, i.e. where the file system keeps the old generation read-only; as the
superuser, on a file system that ignores file modes (many network shares), or for a page made writable
again, the verified bytes are copied instead, so no later edit of one generation can reach the other.
"""

from __future__ import annotations

import hashlib
import os
import stat
from pathlib import Path
from typing import Any


def sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _read_only() -> int:
    from loopledger.output import public_mode

    return public_mode() & 0o444


def write(path: Path, data: bytes) -> None:
    """Write a new file into the staging folder, then make it read-only. Opened exclusively (one call where
    the folder exists): a name already there, which may be a link to a live page, is removed first, never
    written through."""
    try:
        fh = open(path, "xb")
    except FileNotFoundError:
        path.parent.mkdir(parents=True, exist_ok=True)
        fh = open(path, "xb")
    except FileExistsError:
        path.unlink()
        fh = open(path, "xb")
    with fh:
        fh.write(data)
    os.chmod(path, _read_only())


def verified(live: Path, rel: str, entry: Any) -> bytes | None:
    """The live page's bytes when they are what the manifest ``entry`` records (its ``sha``); None when the
    page is missing, not a regular file, or differs (edited by hand, or a manifest without hashes)."""
    expected = entry.get("sha") if isinstance(entry, dict) else None
    if not expected:
        return None
    path = live / rel
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_NONBLOCK", 0))
    except OSError:
        return None
    with os.fdopen(fd, "rb") as fh:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            return None
        data = fh.read()
    return data if sha(data) == expected else None


def edited(live: Path, rel: str, entry: Any) -> bool:
    """Whether a page whose hash the manifest ``entry`` records is there but differs from it (call it for a
    page :func:`verified` refused)."""
    return isinstance(entry, dict) and bool(entry.get("sha")) and os.path.lexists(live / rel)


def place(live: Path, folder: Path, rel: str, data: bytes) -> None:
    """Put the verified page ``data`` of ``live/rel`` into ``folder``: a hard link where the live page cannot
    be written by this process, else a copy of the verified bytes."""
    source, target = live / rel, folder / rel
    if not os.access(source, os.W_OK, follow_symlinks=False):
        try:
            os.link(source, target)
            return
        except FileNotFoundError:
            target.parent.mkdir(parents=True, exist_ok=True)
            try:
                os.link(source, target)
                return
            except OSError:
                pass
        except OSError:
            pass
    write(target, data)
