"""Sharing work out to forked workers (loopledger.cache.forking)."""

from __future__ import annotations

import gc
import os
import signal
import subprocess
import sys
import time

import pytest
from loopledger.cache.forking import SideJobFailed, can_fork, fork_pool, share_out, side_job


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


@pytest.mark.skipif(not can_fork(), reason="no fork here: the side job runs first, in this process")
def test_a_side_job_runs_in_another_process_while_the_block_runs(tmp_path):
    """The side job runs in a forked process (another pid) at the same time as the block; both are
    finished when the block is left."""
    side_done, main_done = tmp_path / "side", tmp_path / "main"

    def side() -> None:
        deadline = time.monotonic() + 30
        while not main_done.exists() and time.monotonic() < deadline:  # the two overlap: this waits for main
            time.sleep(0.01)
        side_done.write_text(f"{os.getpid()} {main_done.exists()}", encoding="utf-8")

    with side_job(side):
        main_done.write_text(str(os.getpid()), encoding="utf-8")
    assert side_done.exists(), "the block was left before the side job finished"
    pid, saw_main = side_done.read_text(encoding="utf-8").split()
    assert saw_main == "True", "the side job did not run while the block did"
    assert int(pid) != os.getpid() == int(main_done.read_text(encoding="utf-8"))
    assert gc.get_freeze_count() == 0, "this process's heap is left to its collector"


@pytest.mark.skipif(not can_fork(), reason="no fork here: the side job runs first, in this process")
def test_a_side_jobs_error_is_raised_when_waited_for_and_the_blocks_own_error_wins(tmp_path, capfd):
    def broken() -> None:
        raise OSError("disk full while writing data/")

    after = tmp_path / "after"
    with pytest.raises(SideJobFailed, match="broken"), side_job(broken) as finished:
        finished()  # what must not happen unless the side job succeeded waits here
        after.write_text("should not be written", encoding="utf-8")
    assert not after.exists()
    assert "disk full while writing data/" in capfd.readouterr().err, "the side job's own error is shown"

    with pytest.raises(SideJobFailed), side_job(broken):  # left without waiting: raised on the way out
        after.write_text("done", encoding="utf-8")
    assert after.exists(), "the block was cut short by the side job's error"

    side_done = tmp_path / "side"

    def slow_side() -> None:
        time.sleep(0.2)
        side_done.write_text("done", encoding="utf-8")

    with pytest.raises(ZeroDivisionError), side_job(slow_side):
        raise ZeroDivisionError("the block's own error")
    assert side_done.exists(), "the block's error was raised before the side job finished"


@pytest.mark.skipif(not sys.platform.startswith("linux") or not can_fork(),
                    reason="the kernel ends a side job with its process only on Linux")
def test_a_side_job_ends_when_its_process_is_killed(tmp_path):
    """A run killed while its tables are being written must stop writing, not leave a job of it to finish
    on its own later (and swap in outputs of a run that never completed)."""
    marker = tmp_path / "finished"
    script = (
        "import os, signal, time\n"
        "from loopledger.cache.forking import side_job\n"
        "def side():\n"
        "    time.sleep(1.5)\n"
        f"    open({str(marker)!r}, 'w').write('the side job outlived its process')\n"
        "with side_job(side):\n"
        "    time.sleep(0.3)\n"
        "    os.kill(os.getpid(), signal.SIGKILL)\n")
    done = subprocess.run([sys.executable, "-c", script], timeout=60, check=False)
    assert done.returncode == -signal.SIGKILL
    time.sleep(3.0)  # well past the side job's own end, had it lived
    assert not marker.exists()
