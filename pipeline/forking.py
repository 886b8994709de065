"""Worker processes made by forking, for the jobs that use the machine's cores: parsing many new result
files, writing the exported tables, building the handbook's pages, and writing the tables while the
handbook is built.

Forked workers share the parent's tables without copying them or pickling them.
While the pool runs, everything the parent holds is moved out of the cyclic
garbage collector's reach (``gc.freeze``): otherwise each worker's collector
walks the whole inherited heap, touching every page of it, so the kernel copies
those pages into every worker (more CPU time and more memory for nothing). The
heap is handed back to the collector when the pool closes.
"""

from __future__ import annotations

import contextlib
import gc
import multiprocessing
import os
import sys
import traceback
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor


def can_fork() -> bool:
    return "fork" in multiprocessing.get_all_start_methods()


def share_out(costs: Sequence[float], n: int) -> list[list[int]]:
    """The indices of ``costs`` shared into ``n`` groups of about equal total: largest first, each to the
    group with the least so far (ties in the order given)."""
    groups: list[list[int]] = [[] for _ in range(max(1, n))]
    load = [0.0] * len(groups)
    for i in sorted(range(len(costs)), key=lambda i: -costs[i]):
        k = load.index(min(load))
        groups[k].append(i)
        load[k] += costs[i]
    return groups


@contextlib.contextmanager
def fork_pool(workers: int) -> Iterator[ProcessPoolExecutor]:
    """A pool of ``workers`` forked processes (the caller checks :func:`can_fork` first)."""
    gc.freeze()
    try:
        with ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("fork")) as pool:
            yield pool
    finally:
        gc.unfreeze()


class SideJobFailed(RuntimeError):
    """The job :func:`alongside` ran in a forked process failed (it printed its own error first)."""


def alongside(side: Callable[[], None], main: Callable[[], None]) -> None:
    """Run ``side`` in a forked process while this process runs ``main``; return when both are done.

    The forked process shares this one's tables without copying them (its collector is kept off the
    inherited heap, as in :func:`fork_pool`). An error in ``side`` is printed there and raised here, as
    :class:`SideJobFailed`, once ``main`` has finished; an error in ``main`` is raised after ``side`` has
    finished. Where fork is not offered, ``side`` runs first, then ``main``, in this process.
    """
    if not can_fork():
        side()
        main()
        return
    sys.stdout.flush()
    sys.stderr.flush()
    pid = os.fork()
    if pid == 0:  # pragma: no cover - the forked process; its outcome is its exit status
        code = 0
        try:
            gc.freeze()
            side()
        except KeyboardInterrupt:
            code = 130
        except BaseException:
            traceback.print_exc()
            code = 1
        finally:
            sys.stdout.flush()
            sys.stderr.flush()
            os._exit(code)
    try:
        main()
    finally:
        while True:
            try:
                _, status = os.waitpid(pid, 0)
                break
            except InterruptedError:
                continue
    code = os.waitstatus_to_exitcode(status)
    if code != 0:
        raise SideJobFailed(f"the side job {getattr(side, '__name__', side)!r} failed (exit status {code})")
