"""Sharing work out to forked workers (loopledger.forking)."""

from __future__ import annotations

import gc
import os
import time

import pytest
from loopledger.forking import SideJobFailed, alongside, can_fork, fork_pool, share_out


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


@pytest.mark.skipif(not can_fork(), reason="no fork here: alongside runs the two jobs one after the other")
def test_alongside_runs_the_side_job_in_another_process_and_waits_for_it(tmp_path):
    """The side job runs in a forked process (another pid) at the same time as the main one; both are
    finished when ``alongside`` returns."""
    side_done, main_done = tmp_path / "side", tmp_path / "main"

    def side() -> None:
        deadline = time.monotonic() + 30
        while not main_done.exists() and time.monotonic() < deadline:  # the two overlap: this waits for main
            time.sleep(0.01)
        side_done.write_text(f"{os.getpid()} {main_done.exists()}", encoding="utf-8")

    alongside(side, lambda: main_done.write_text(str(os.getpid()), encoding="utf-8"))
    assert side_done.exists(), "returned before the side job finished"
    pid, saw_main = side_done.read_text(encoding="utf-8").split()
    assert saw_main == "True", "the side job did not run while the main one did"
    assert int(pid) != os.getpid() == int(main_done.read_text(encoding="utf-8"))
    assert gc.get_freeze_count() == 0, "this process's heap is left to its collector"


@pytest.mark.skipif(not can_fork(), reason="no fork here: alongside runs the two jobs one after the other")
def test_alongside_raises_either_jobs_error_after_both_are_done(tmp_path, capfd):
    def broken() -> None:
        raise OSError("disk full while writing data/")

    main_done = tmp_path / "main"
    with pytest.raises(SideJobFailed, match="broken"):
        alongside(broken, lambda: main_done.write_text("done", encoding="utf-8"))
    assert main_done.exists(), "the main job was cut short by the side job's error"
    assert "disk full while writing data/" in capfd.readouterr().err, "the side job's own error is shown"

    side_done = tmp_path / "side"

    def slow_side() -> None:
        time.sleep(0.2)
        side_done.write_text("done", encoding="utf-8")

    with pytest.raises(ZeroDivisionError):
        alongside(slow_side, lambda: 1 / 0)
    assert side_done.exists(), "the main job's error was raised before the side job finished"
