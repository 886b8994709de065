"""Sharing work out to forked workers (loopledger.forking)."""

from __future__ import annotations

import gc

import pytest
from loopledger.forking import can_fork, fork_pool, share_out


def _square(x: int) -> int:
    return x * x


def test_share_out_is_the_largest_first_greedy_rule():
    """Largest first, each to the least-loaded group (Graham's LPT rule, 1969); worked by hand:
    5 → A, 4 → B, 3 → B (7), 3 → A (8), 3 → B (10)."""
    assert share_out([5, 4, 3, 3, 3], 2) == [[0, 3], [1, 2, 4]]
    groups = share_out([1.0] * 7 + [6.0], 3)
    assert sorted(i for g in groups for i in g) == list(range(8)), "every item in exactly one group"
    assert groups[0] == [7] and sorted(len(g) for g in groups[1:]) == [3, 4]
    assert share_out([], 2) == [[], []] and share_out([2.0], 0) == [[0]]


@pytest.mark.skipif(not can_fork(), reason="no fork here: callers run every job in the main process")
def test_fork_pool_runs_work_and_hands_the_heap_back():
    with fork_pool(2) as pool:
        assert list(pool.map(_square, range(5))) == [0, 1, 4, 9, 16]
        assert gc.get_freeze_count() > 0, "the inherited heap is out of the collector's reach meanwhile"
    assert gc.get_freeze_count() == 0
