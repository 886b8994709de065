"""Issue 21 item 6: kill -9 at random moments of a rerun, and nothing is lost, blocked or stale.

Each trial changes some result files of a small invented fleet, starts `loopledger run` in a session of
its own, and kills the process and its whole process group with SIGKILL at a random moment of the run.
Then it checks the three things the issue names:

- the previous outputs are whole: ``data/`` and ``handbook/`` are each either exactly the previous run's
  or exactly what a complete run of the new evidence makes (swapped in whole before the kill);
- the next run finishes (no lock left held, no worker left behind);
- the next run equals a cold run (``--no-cache`` into an empty folder) byte for byte.

Three trials by default; set ``LOOPLEDGER_SOAK_TRIALS`` for more (and ``LOOPLEDGER_SOAK_SEED`` to vary the
moments and the files changed).
"""

from __future__ import annotations

import hashlib
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence

ROOT = Path(__file__).resolve().parents[2]
TRIALS = int(os.environ.get("LOOPLEDGER_SOAK_TRIALS", "3"))
SEED = int(os.environ.get("LOOPLEDGER_SOAK_SEED", "21"))
ASSETS = 4
FILES = 20


def _digest(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _run(ev: Path, out: Path, *extra: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "loopledger", "run", str(ev), "--out", str(out), *extra],
                          env={**os.environ, "PYTHONPATH": str(ROOT)}, capture_output=True, text=True, timeout=600,
                          check=False)


def _result(i: int, version: int) -> str:
    return result_yaml(asset=f"T-{i % ASSETS}", date=f"2026-{1 + i % 9:02d}-{10 + version % 18:02d}",
                       as_found=good_points(0.001 * ((i + version) % 7)))


def test_kill_9_at_random_moments_loses_nothing_and_blocks_nothing(tmp_path):
    rng = random.Random(SEED)
    ev = write_evidence(tmp_path / "ev", {f"2026/t{i}.yaml": _result(i, 0) for i in range(FILES)},
                        assets=[{**CT_ASSET, "asset": f"T-{a}"} for a in range(ASSETS)])
    out = tmp_path / "out"
    started = time.monotonic()
    assert _run(ev, out).returncode in (0, 1)
    duration = time.monotonic() - started
    for trial in range(1, TRIALS + 1):
        for i in rng.sample(range(FILES), 3):
            (ev / "results" / "2026" / f"t{i}.yaml").write_text(_result(i, trial), encoding="utf-8")
        before = {name: _digest(out / name) for name in ("data", "handbook")}
        proc = subprocess.Popen([sys.executable, "-m", "loopledger", "run", str(ev), "--out", str(out)],
                                env={**os.environ, "PYTHONPATH": str(ROOT)}, stdout=subprocess.DEVNULL,
                                stderr=subprocess.DEVNULL, start_new_session=True)
        time.sleep(rng.uniform(0.1, duration))
        try:
            os.killpg(proc.pid, signal.SIGKILL)  # the run and every process of its group
        except ProcessLookupError:
            pass  # it had finished
        proc.wait(timeout=60)
        killed = {name: _digest(out / name) for name in ("data", "handbook")}
        cold = tmp_path / f"cold{trial}"
        expected = _run(ev, cold, "--no-cache")
        complete = {name: _digest(cold / name) for name in ("data", "handbook")}
        for name in ("data", "handbook"):
            assert killed[name] in (before[name], complete[name]), f"trial {trial}: {name}/ was left half-written"
        again = _run(ev, out)  # finishes (within the timeout): no lock or worker left holding OUT
        assert again.returncode == expected.returncode, again.stderr
        for name in ("data", "handbook"):
            assert _digest(out / name) == complete[name], f"trial {trial}: {name}/ differs from a cold run"
