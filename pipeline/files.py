"""The file-system rules every read of the evidence folder follows, in one place.

- Only regular files are read. A named pipe (FIFO), socket or device is refused without blocking on it: a
  FIFO called ``x.yaml`` would otherwise make a run wait for ever, and its size reads as 0, so no size
  limit would apply.
- A symbolic link at the top of the evidence folder (``results/`` itself, ``assets.csv``,
  ``instruments.yaml``, ``loopledger.toml``) is refused unless the run is told to follow links, and then
  only to a target inside the evidence folder. Links under ``results/`` are never followed (see
  :mod:`loopledger.discover`).
- Two folders overlap when one is, or lies inside, the other. That is decided by the identity of the
  folders on disk (device and inode), not by comparing names, so symbolic links, ``..``, bind mounts and
  file systems that ignore case cannot hide an overlap.

Standard library only: the no-change replay uses it before pandas is imported.
"""

from __future__ import annotations

import errno
import os
import stat
from pathlib import Path


class NotRegular(ValueError):
    """A path that is not a regular file (a folder, a named pipe, a socket or a device)."""


def kind(mode: int) -> str:
    """What a file of this ``st_mode`` is, in words."""
    if stat.S_ISREG(mode):
        return "a regular file"
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISLNK(mode):
        return "a symbolic link"
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    return "not a regular file"


def read_regular(path: Path, limit: int, setting: str = "limits.max_file_bytes in loopledger.toml") -> bytes:
    """The bytes of the regular file ``path``, read without following a link in its last component and
    without blocking on a FIFO. Raises :class:`NotRegular` for anything else, and ValueError for a file over
    ``limit`` bytes (never read whole); OSError as ``open`` does."""
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0)
    flags |= getattr(os, "O_BINARY", 0)
    try:
        fd = os.open(path, flags)
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise NotRegular("a symbolic link; it is not followed") from None
        raise
    with os.fdopen(fd, "rb") as fh:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise NotRegular(f"{kind(st.st_mode)}, not a regular file; it is not read")
        data = fh.read(limit + 1) if st.st_size <= limit else b""
    if st.st_size > limit or len(data) > limit:
        raise ValueError(f"file is {max(st.st_size, len(data)):,} bytes, over the limit of {limit:,} ({setting})")
    return data


def inside(inner: Path, outer: Path) -> bool:
    """True when ``inner`` is ``outer`` or lies inside it, judged by the folders' identity on disk.

    ``inner`` need not exist (an output folder not made yet): only the folders of it that do exist are
    compared."""
    try:
        target = os.stat(outer)
    except OSError:
        return False
    here = Path(os.path.abspath(inner)).resolve()
    for folder in (here, *here.parents):
        try:
            st = os.stat(folder)
        except OSError:
            continue
        if (st.st_dev, st.st_ino) == (target.st_dev, target.st_ino):
            return True
    return False


class LinkRefused(ValueError):
    """A link or special file at the top of the evidence folder that the run will not read."""


def evidence_entry(evidence: Path, name: str, follow_links: bool, folder: bool = False) -> Path | None:
    """The path to read for ``evidence/name`` (a register, or ``results/`` with ``folder``), checked with
    ``lstat``: None when there is nothing there. A link is refused (:class:`LinkRefused`) unless
    ``follow_links``, and then only when its target lies inside the evidence folder; the path returned is
    then the target's. Anything but a regular file (or a folder, for ``folder``) is refused too."""
    path = evidence / name
    try:
        st = os.lstat(path)
    except FileNotFoundError:
        return None
    if stat.S_ISLNK(st.st_mode):
        target = path.resolve()
        if not follow_links:
            raise LinkRefused(f"'{name}' is a symbolic link (to '{os.readlink(path)}'); it is not followed. Put the "
                              "real folder or file there, or give --follow-links if it points inside the evidence "
                              "folder")
        if not inside(target, evidence) or not target.exists():
            raise LinkRefused(f"'{name}' is a symbolic link to '{target}', outside the evidence folder (or to "
                              "nothing); --follow-links follows only links that stay inside it")
        path = target
        st = os.stat(path)
    wanted = stat.S_ISDIR(st.st_mode) if folder else stat.S_ISREG(st.st_mode)
    if not wanted:
        raise LinkRefused(f"'{name}' is {kind(st.st_mode)}, not {'a folder' if folder else 'a regular file'}; "
                          "it is not read")
    return path


def outside_evidence(evidence: Path, path: Path, what: str) -> Path:
    """``path`` resolved; a ConfigError when it and the evidence folder overlap: when it is the evidence
    folder, lies inside it or holds it (a run replaces OUT/data and OUT/handbook whole, and tidies the cache
    folder, so an evidence folder there would be deleted). Overlap is judged by the folders' identity on
    disk, so links, ``..`` and file systems that ignore case cannot hide it."""
    from loopledger.config import ConfigError

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
