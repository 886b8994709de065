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
    """A pool of ``workers`` forked processes (the caller checks :func:`can_fork` first). Each worker ends
    when the process that made the pool ends (:func:`_end_with`), so a killed run leaves no worker behind."""
    gc.freeze()
    try:
        with ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("fork"), initializer=_end_with,
                                 initargs=(os.getpid(),)) as pool:
            yield pool
    finally:
        gc.unfreeze()


def _end_with(parent: int) -> None:
    """Have the kernel end this forked process when ``parent`` ends (Linux; elsewhere nothing), so a run
    that is killed stops writing, rather than a job of it finishing on its own later."""
    if sys.platform.startswith("linux"):
        import ctypes
        import signal

        with contextlib.suppress(OSError, AttributeError):
            pr_set_pdeathsig = 1
            ctypes.CDLL(None, use_errno=True).prctl(pr_set_pdeathsig, int(signal.SIGKILL), 0, 0, 0)
    if os.getppid() != parent:  # the parent ended before the request was in place
        os._exit(1)


#: a side job's exit status when it stopped on an OSError (sysexits.h's EX_IOERR)
EX_IOERR = 74


class SideJobFailed(RuntimeError):
    """The job :func:`side_job` ran in a forked process failed (it printed its own error first)."""

    reported = True  #: the error itself was printed by the forked process
    os_error = False  #: it stopped on an OSError (a full disk, a folder it may not write to ...)


@contextlib.contextmanager
def side_job(side: Callable[[], None]) -> Iterator[Callable[[], None]]:
    """Run ``side`` in a forked process while the body of the ``with`` runs here.

    Yields ``finished``: it waits for ``side`` and raises :class:`SideJobFailed` if it failed (call it
    before doing anything that must not happen unless ``side`` succeeded). Leaving the block calls it
    too, so both jobs are done when the block is left; an error in the body is raised rather than the
    side job's. The forked process shares this one's tables without copying them (its collector is kept
    off the inherited heap, as in :func:`fork_pool`) and prints its own error. Where fork is not offered,
    ``side`` runs here first.
    """
    if not can_fork():
        side()
        yield lambda: None
        return
    sys.stdout.flush()
    sys.stderr.flush()
    parent = os.getpid()
    pid = os.fork()
    if pid == 0:  # pragma: no cover - the forked process; its outcome is its exit status
        code = 0
        try:
            _end_with(parent)
            gc.freeze()
            side()
        except KeyboardInterrupt:
            code = 130
        except OSError as exc:  # the disk or the file system, not a bug: one line says it
            from loopledger.output import file_problem

            sys.stderr.write(file_problem(exc) + "\n")
            code = EX_IOERR
        except BaseException:
            traceback.print_exc()
            code = 1
        finally:
            sys.stdout.flush()
            sys.stderr.flush()
            os._exit(code)
    status: list[int] = []

    def finished() -> None:
        if not status:  # waitpid retries by itself when a signal interrupts it (PEP 475)
            status.append(os.waitstatus_to_exitcode(os.waitpid(pid, 0)[1]))
        if status[0] != 0:
            failed = SideJobFailed(f"the side job {getattr(side, '__name__', side)!r} failed (exit status {status[0]})")
            failed.os_error = status[0] == EX_IOERR
            raise failed

    try:
        yield finished
    except BaseException:
        with contextlib.suppress(SideJobFailed):
            finished()
        raise
    finished()
