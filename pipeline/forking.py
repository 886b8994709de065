"""Worker processes made by forking, for the three jobs that use the machine's cores: parsing many new
result files, writing the exported tables and building the handbook's pages.

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
from collections.abc import Iterator, Sequence
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
