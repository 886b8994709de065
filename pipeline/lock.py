"""The lock one run holds on its output folder (``OUT/.loopledger.lock``).

Two runs writing one output folder at once would each take the other's staging folder for a killed run's
leftovers and remove it; the second waits instead.

The lock is a POSIX record lock (``fcntl.lockf``), which a forked process does not inherit: the parsing,
table and page workers a run forks never hold it, so a run killed with its workers still alive cannot leave
the folder locked (an ``flock`` lock, shared with every forked child, could). The system lets go of it when
the run's process ends, however it ends. The holder writes its process id and start time into the file; a
run that finds the lock held names the holder, says whether it is a live loopledger run, waits at most a
stated time and then stops with a clear message instead of waiting for ever. Where ``fcntl`` is not offered
(Windows) nothing is locked.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import errno
import json
import os
import sys
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

LOCK_NAME = ".loopledger.lock"
#: seconds a run waits for another run's lock by default (``loopledger run --wait``)
DEFAULT_WAIT = 600.0


class LockHeld(Exception):
    """The output folder stayed locked by another process for longer than the run was told to wait."""


def _proc_start(pid: int) -> float | None:
    """The wall-clock time process ``pid`` started, from /proc (Linux); None where that cannot be read."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            fields = fh.read().rsplit(b")", 1)[1].split()
        ticks = int(fields[19])  # field 22 of stat(5), counted after the command name
        with open("/proc/stat", "rb") as fh:
            boot = next(int(line.split()[1]) for line in fh if line.startswith(b"btime "))
        return boot + ticks / os.sysconf("SC_CLK_TCK")
    except (OSError, ValueError, IndexError, StopIteration):
        return None


def _is_loopledger(pid: int) -> bool | None:
    """Whether process ``pid`` runs loopledger (its command line names it); None where that cannot be read."""
    try:
        with open(f"/proc/{pid}/cmdline", "rb") as fh:
            return b"loopledger" in fh.read()
    except FileNotFoundError:
        return False if os.path.isdir("/proc/self") else None
    except OSError:
        return None


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # alive, another user's
        return True
    return True


def _holder_pid(fd: int) -> int | None:
    """The process holding the lock, as the kernel reports it (Linux's ``struct flock``); else None."""
    if not sys.platform.startswith("linux"):
        return None
    import fcntl
    import struct

    try:
        query = struct.pack("hhqqi4x", fcntl.F_WRLCK, os.SEEK_SET, 0, 0, 0)
        answer = fcntl.fcntl(fd, fcntl.F_GETLK, query)
        kind, _whence, _start, _len, pid = struct.unpack("hhqqi4x", answer)
    except (OSError, struct.error, ValueError):
        return None
    return int(pid) if kind != fcntl.F_UNLCK and pid > 0 else None


def _stamp(when: float | None) -> str:
    if when is None:
        return "at an unknown time"
    return dt.datetime.fromtimestamp(when, dt.UTC).strftime("%Y-%m-%d %H:%M:%S UTC")


def holder(fd: int) -> str:
    """Who holds the lock on ``fd``'s file, in words: process id, start time, and whether it is a live
    loopledger run (from the kernel where it says, else from what the holder wrote into the file)."""
    recorded: dict[str, Any] = {}
    with contextlib.suppress(OSError, ValueError):
        found = json.loads(os.pread(fd, 4096, 0) or b"{}")
        recorded = found if isinstance(found, dict) else {}
    pid = _holder_pid(fd) or (int(recorded["pid"]) if str(recorded.get("pid", "")).isdigit() else None)
    if pid is None:
        return "another process (its id cannot be read)"
    started = _proc_start(pid)
    if started is None and recorded.get("pid") == pid:
        started = recorded.get("started")
    ours = _is_loopledger(pid)
    if not _alive(pid):
        return f"process {pid}, which has ended"
    what = {True: "a loopledger run, ", False: "a process that is not a loopledger run, ", None: ""}[ours]
    return f"{what}process {pid}, started {_stamp(started)}"


def _take(fd: int) -> bool:
    """Try once to take the lock; False when another process holds it."""
    import fcntl

    try:
        fcntl.lockf(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        if exc.errno in (errno.EACCES, errno.EAGAIN):
            return False
        raise
    return True


@contextlib.contextmanager
def exclusive(folder: Path, say: Callable[[str], Any] | None = None, wait: float = DEFAULT_WAIT) -> Iterator[None]:
    """Hold the lock on ``folder`` for the body; wait at most ``wait`` seconds for another holder, telling
    ``say`` who holds it, then raise :class:`LockHeld`. On a file system that keeps no locks (some network
    shares) the body runs unlocked, as before."""
    try:
        import fcntl  # noqa: F401
    except ImportError:  # pragma: no cover - not on the machines this runs on
        yield
        return
    folder.mkdir(parents=True, exist_ok=True)
    fd = os.open(folder / LOCK_NAME, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o666)
    try:
        try:
            got = _take(fd)
        except OSError:  # no locks on this file system
            got = None
        if got is False:
            _wait_for(fd, folder, say, wait)
        if got is not None:
            with contextlib.suppress(OSError):
                mine = json.dumps({"pid": os.getpid(), "started": _proc_start(os.getpid()) or time.time(),
                                   "program": "loopledger"}).encode()
                os.ftruncate(fd, 0)
                os.pwrite(fd, mine + b"\n", 0)
        yield
    finally:
        os.close(fd)  # lets go of the lock


def _wait_for(fd: int, folder: Path, say: Callable[[str], Any] | None, wait: float) -> None:
    """Poll for the lock until ``wait`` seconds have passed; tell ``say`` who holds it (again when that
    changes); raise :class:`LockHeld` at the end."""
    deadline = time.monotonic() + wait
    told = ""
    pause = 0.05
    while True:
        who = holder(fd)
        if who != told and say is not None:
            say(f"loopledger: another run is writing to '{folder}': the lock ({LOCK_NAME}) is held by {who}; "
                f"waiting up to {wait:g} s for it to finish\n")
        told = who
        time.sleep(min(pause, max(0.0, deadline - time.monotonic())))
        pause = min(pause * 2, 0.5)
        if _take(fd):
            return
        if time.monotonic() >= deadline:
            raise LockHeld(f"'{folder}' is still locked after {wait:g} s, by {holder(fd)}. If that run is still "
                           "working, let it finish or give --wait more seconds; if it is stuck, end that process "
                           "(the lock goes with it)")
