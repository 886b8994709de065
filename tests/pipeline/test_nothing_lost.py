"""Issue 21: outputs never touch the evidence, a killed run never blocks the next, a rebuild tells the truth.

Plumbing tests on invented evidence folders (tests/evidence.py). What they check is the project's own
contract (docs/guide.md "Incremental runs and pre-commit"): the evidence folder and the output or cache folder
never overlap; the lock on OUT dies with the run and names its holder; a no-change replay happens only
when every output is still as written; a same-size edit with its time stamp put back is still seen.
"""

from __future__ import annotations

import csv
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from loopledger.cli import main
from loopledger.lock import exclusive

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence

ROOT = Path(__file__).resolve().parents[2]
ENV = {**os.environ, "PYTHONPATH": str(ROOT)}


def _tree(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()}


def _fleet(root: Path, n: int = 3) -> Path:
    return write_evidence(root, {f"2026/a{i}.yaml": result_yaml(date=f"2026-0{1 + i}-10", as_found=good_points())
                                 for i in range(n)})


# --- 1. no overlap, ever ------------------------------------------------------------------------------

@pytest.mark.parametrize("inside", ["data", "handbook", ".loopledger-cache", "", "deeper/still"])
def test_an_evidence_folder_inside_out_is_refused_and_left_whole(tmp_path, capsys, inside):
    """`run out/data --out out` once swapped out/data for the tables and deleted every result file."""
    out = tmp_path / "out"
    ev = _fleet(out / inside / "ev" if inside == "" else out / inside)
    before = _tree(ev)
    assert main(["run", str(ev), "--out", str(out)]) == 3
    err = capsys.readouterr().err
    assert f"the evidence folder '{ev.resolve()}' is inside --out '{out.resolve()}'" in err
    assert _tree(ev) == before
    assert not (out / "data" / "tests.csv").exists() or inside == "data"


def test_the_evidence_folder_as_out_itself_is_refused(tmp_path, capsys):
    ev = _fleet(tmp_path / "ev")
    before = _tree(ev)
    assert main(["run", str(ev), "--out", str(ev)]) == 3
    assert "inside the evidence folder" in capsys.readouterr().err
    assert _tree(ev) == before


def test_a_link_does_not_hide_the_overlap(tmp_path, capsys):
    out = tmp_path / "out"
    ev = _fleet(out / "data")
    link = tmp_path / "evidence-link"
    link.symlink_to(out / "data", target_is_directory=True)
    before = _tree(ev)
    assert main(["run", str(link), "--out", str(out)]) == 3
    assert "is inside --out" in capsys.readouterr().err
    assert _tree(ev) == before


def test_a_cache_folder_holding_the_evidence_is_refused_for_run_and_check(tmp_path, capsys):
    ev = _fleet(tmp_path / "store" / "ev")
    before = _tree(ev)
    assert main(["run", str(ev), "--out", str(tmp_path / "out"), "--cache", str(tmp_path / "store")]) == 3
    assert f"is inside --cache '{(tmp_path / 'store').resolve()}'" in capsys.readouterr().err
    assert main(["check", str(ev), "--cache", str(tmp_path / "store")]) == 3
    assert "is inside --cache" in capsys.readouterr().err
    assert main(["check", str(ev), "--cache", str(ev / "c")]) == 3
    assert "inside the evidence folder" in capsys.readouterr().err
    assert _tree(ev) == before


def test_case_insensitive_names_are_compared_by_identity(tmp_path):
    """A second name for the same folder (here a bind of it by a link, as a case-insensitive file system gives
    `OUT/Data` for `OUT/data`) is the same folder: overlap is judged by device and inode."""
    from loopledger.files import inside

    (tmp_path / "out" / "data").mkdir(parents=True)
    alias = tmp_path / "OUT-alias"
    alias.symlink_to(tmp_path / "out")
    assert inside(alias / "data" / "ev", tmp_path / "out")
    assert inside(tmp_path / "out" / "data", alias)
    assert not inside(tmp_path / "outside", tmp_path / "out")


# --- 2. the lock dies with the run --------------------------------------------------------------------

_HOLD_AND_FORK = """
import os, sys, time
from pathlib import Path
from loopledger.lock import exclusive
with exclusive(Path(sys.argv[1])):
    child = os.fork()
    if child == 0:  # a worker forked while the lock is held, as the pools and side jobs are
        time.sleep(60)
        os._exit(0)
    print(child, flush=True)
    time.sleep(60)
"""


def test_a_forked_child_does_not_keep_the_lock_after_its_run_is_killed(tmp_path):
    """Forked workers that outlived a killed run once held OUT's lock through an inherited descriptor, so
    every later run waited for ever."""
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-c", _HOLD_AND_FORK, str(out)], env=ENV, stdout=subprocess.PIPE,
                            text=True)
    child = int(proc.stdout.readline())
    try:
        proc.kill()  # the run only, as kill -9 of its process id does; the child lives on
        proc.wait(timeout=30)
        os.kill(child, 0)  # still alive
        started = time.monotonic()
        with exclusive(out, wait=20):
            assert time.monotonic() - started < 20
    finally:
        try:
            os.kill(child, signal.SIGKILL)
        except ProcessLookupError:
            pass


_POOL = """
import os, sys, time
from loopledger.cache.forking import fork_pool
with fork_pool(2) as pool:
    pids = {pool.submit(os.getpid).result() for _ in range(8)}
    jobs = [pool.submit(time.sleep, 60) for _ in range(2)]
    print(" ".join(map(str, pids)), flush=True)
    time.sleep(60)
"""


def test_pool_workers_end_when_their_run_is_killed(tmp_path):
    proc = subprocess.Popen([sys.executable, "-c", _POOL], env=ENV, stdout=subprocess.PIPE, text=True)
    workers = [int(p) for p in proc.stdout.readline().split()]
    assert workers
    proc.kill()
    proc.wait(timeout=30)
    deadline = time.monotonic() + 20
    alive = list(workers)
    while alive and time.monotonic() < deadline:
        time.sleep(0.1)
        alive = [pid for pid in alive if _running(pid)]
    for pid in alive:
        os.kill(pid, signal.SIGKILL)
    assert not alive, f"workers {alive} outlived their killed run"


def _running(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"  # a zombie has ended
    except OSError:
        return False


_HOLD = """
import sys, time
from pathlib import Path
from loopledger.lock import exclusive
with exclusive(Path(sys.argv[-1])):
    print("held", flush=True)
    time.sleep(60)
"""


def test_a_held_lock_names_its_holder_and_the_wait_ends_with_a_message(tmp_path, capsys):
    ev = _fleet(tmp_path / "ev", 1)
    out = tmp_path / "out"
    holder = subprocess.Popen([sys.executable, "-c", _HOLD, "loopledger-test-holder", str(out)], env=ENV,
                              stdout=subprocess.PIPE, text=True)
    try:  # (the name given puts 'loopledger' in the holder's command line, as `loopledger run` has it)
        holder.stdout.readline()
        assert main(["run", str(ev), "--out", str(out), "--wait", "1"]) == 3
    finally:
        holder.kill()
        holder.wait(timeout=30)
    err = capsys.readouterr().err
    assert f"held by a loopledger run, process {holder.pid}, started 20" in err
    assert "waiting up to 1 s" in err
    assert "is still locked after 1 s" in err and "--wait" in err
    assert not (out / "data").exists()


# --- 3. a replay only when every output is still as written -------------------------------------------

def test_deleted_outputs_are_rebuilt_not_replayed(tmp_path, capsys):
    """After data/budget.csv and one asset page were deleted, the no-change rerun replayed the last summary
    and left them missing."""
    ev = _fleet(tmp_path / "ev")
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 0
    first = _tree(out / "data"), _tree(out / "handbook")
    page = next(p for p in sorted((out / "handbook" / "assets").iterdir()) if p.suffix == ".html")
    (out / "data" / "budget.csv").unlink()
    page.unlink()
    assert main(["run", str(ev), "--out", str(out)]) == 0
    capsys.readouterr()
    assert (_tree(out / "data"), _tree(out / "handbook")) == first


def test_an_output_edited_in_place_with_its_time_stamp_put_back_is_rebuilt(tmp_path, capsys):
    ev = _fleet(tmp_path / "ev")
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 0
    tests_csv = out / "data" / "tests.csv"
    good = tests_csv.read_bytes()
    st = tests_csv.stat()
    with open(tests_csv, "r+b") as fh:  # same size, one byte changed, in place (same inode)
        fh.seek(len(good) - 2)
        fh.write(b"X")
    os.utime(tests_csv, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert main(["run", str(ev), "--out", str(out)]) == 0
    capsys.readouterr()
    assert tests_csv.read_bytes() == good


# --- 4. change detection that time stamps cannot fool ------------------------------------------------

def test_a_same_size_edit_with_its_mtime_restored_is_seen(tmp_path, capsys, parse_calls):
    """A reading changed from 9.986 to 9.996 and `touch -r` once kept the old reading in the evidence."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=[("0 %", "4.000 mA"), ("50 %", "9.986 mA"),
                                                                          ("100 %", "20.000 mA")])})
    out = tmp_path / "out"
    main(["run", str(ev), "--out", str(out)])
    path = ev / "results" / "a.yaml"
    st = path.stat()
    text = path.read_text(encoding="utf-8")
    path.write_text(text.replace("9.986 mA", "9.996 mA"), encoding="utf-8")
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns))  # as `touch -r` or a restore from backup does
    assert path.stat().st_size == st.st_size and path.stat().st_mtime_ns == st.st_mtime_ns
    main(["run", str(ev), "--out", str(out)])
    capsys.readouterr()
    assert parse_calls == ["results/a.yaml", "results/a.yaml"]
    with open(out / "data" / "points.csv", encoding="utf-8", newline="") as fh:
        measured = {r["measured"] for r in csv.DictReader(fh)}
    assert "9.996" in measured and "9.986" not in measured


# --- 3. a rebuild tells the truth: kept pages are checked before they are reused ---------------------------

def _two_assets(root: Path) -> Path:
    return write_evidence(root, {"a.yaml": result_yaml(as_found=good_points()),
                                 "b.yaml": result_yaml(asset="T-CT2", as_found=good_points())},
                          assets=[CT_ASSET, {**CT_ASSET, "asset": "T-CT2"}])


@pytest.mark.parametrize("option", [[], ["--no-cache"]])
def test_a_kept_page_edited_in_place_is_made_again_and_named(tmp_path, capsys, option):
    """A page of an unchanged asset, emptied in place, stayed empty after a rebuild and after --no-cache."""
    ev = _two_assets(tmp_path / "ev")
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 0
    page = out / "handbook" / "assets" / "T-CT2.html"
    good = page.read_bytes()
    os.chmod(page, 0o644)  # pages are written read-only; someone "fixing" one by hand makes it writable
    with open(page, "r+b") as fh:
        fh.truncate(0)
    (ev / "results" / "a.yaml").write_text(result_yaml(date="2026-04-15", as_found=good_points()), encoding="utf-8")
    assert main(["run", str(ev), "--out", str(out), "-v", *option]) == 0
    said = capsys.readouterr().out.replace("\n  ", " ")
    assert page.read_bytes() == good
    if not option:  # --no-cache renders every page without looking at the live ones
        assert "handbook/assets/T-CT2.html: warning: this page of the published handbook was not as the last " \
               "run wrote it" in said


def test_no_cache_renders_every_page(tmp_path, capsys, monkeypatch):
    from loopledger.plugins.handbook import build

    ev = _two_assets(tmp_path / "ev")
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 0
    rendered: list[str] = []
    original = build.render_job

    def counting(job):  # type: ignore[no-untyped-def]
        rendered.append(job.rel)
        return original(job)

    monkeypatch.setattr(build, "render_job", counting)
    assert main(["run", str(ev), "--out", str(out), "--no-cache"]) == 0
    capsys.readouterr()
    pages = sorted(p.relative_to(out / "handbook").as_posix() for p in (out / "handbook").rglob("*.html"))
    assert sorted(rendered) == pages


def test_pages_are_written_read_only_and_reused_only_by_link_when_not_writable(tmp_path, capsys):
    """Where this process could write a live page (the superuser, a share that ignores modes), a kept page is
    copied into the new site, not linked, so no edit of one generation can reach the other."""
    ev = _two_assets(tmp_path / "ev")
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 0
    kept = out / "handbook" / "assets" / "T-CT2.html"
    assert kept.stat().st_mode & 0o222 == 0
    os.chmod(kept, 0o644)
    before = kept.stat().st_ino
    (ev / "results" / "a.yaml").write_text(result_yaml(date="2026-04-15", as_found=good_points()), encoding="utf-8")
    assert main(["run", str(ev), "--out", str(out)]) == 0
    capsys.readouterr()
    assert kept.stat().st_ino != before  # copied (it was writable): a new file
