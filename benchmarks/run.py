"""Benchmark loopledger on invented fleets against the floor: a bare parse of every file.

    python benchmarks/run.py [--assets 200 2000] [--years 10] [--workdir build/bench] [--skip-run]

For each fleet (``loopledger synth``, deterministic) it measures, each command in
a fresh child process, wall time and the child's peak RSS (``os.wait4``):

- floor: a bare script that only parses every result file (PyYAML's C loader
  for YAML, pandas for CSV) — the least any tool reading these files must do;
  it runs twice and the second is timed, so it and every command after it
  read from a warm file cache;
- check: ``loopledger check FLEET`` (every stage but the handbook, no cache);
- cold run: ``loopledger run FLEET --out OUT`` with an empty OUT (handbook included);
- no-change rerun: the same command again;
- one-changed rerun: after rewriting one result file (a comment added);
- one-new-test rerun: after adding one result file, a new test of one asset
  (the commonest change in practice; it moves the fleet's reliability figures).

The floor is read again just before each command and that command's ratio is
against the floor read next to it, so a drift in the machine's speed during
the run does not skew the ratios; the floor column gives the median of its reads.
Prints a Markdown table (ratios against the floor) and writes it with the raw
figures to WORKDIR/results.md and results.json. Figures depend on the machine
and its load; README's Performance section records one run with its command.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

FLOOR = r"""
import sys, os, io
import yaml
import pandas as pd
loader = yaml.CSafeLoader
n = 0
for dirpath, dirs, files in os.walk(os.path.join(sys.argv[1], "results")):
    for name in files:
        path = os.path.join(dirpath, name)
        with open(path, "rb") as fh:
            data = fh.read()
        if name.endswith((".yaml", ".yml")):
            yaml.load(data, Loader=loader)
        elif name.endswith(".csv"):
            pd.read_csv(io.BytesIO(data), dtype=str)
        n += 1
print(n, "files parsed")
"""


def timed(cmd: list[str], cwd: Path | None = None) -> tuple[float, int, int, str]:
    """(seconds, peak RSS in MiB, exit code, last line of output) of one child process."""
    start = time.perf_counter()
    proc = subprocess.Popen(cmd, cwd=cwd, stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
    assert proc.stdout is not None
    out = proc.stdout.read()
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - start
    proc.returncode = os.waitstatus_to_exitcode(status)
    lines = out.decode("utf-8", "replace").strip().splitlines()
    return seconds, int(usage.ru_maxrss / 1024), proc.returncode, lines[-1] if lines else ""


def loopledger() -> list[str]:
    return [sys.executable, "-m", "loopledger"]


def bench_fleet(assets: int, years: int, workdir: Path, skip_run: bool, handbook: bool) -> dict[str, object]:
    fleet = workdir / f"fleet-{assets}x{years}"
    out = workdir / f"out-{assets}x{years}"
    if not (fleet / "results").is_dir():
        subprocess.run([*loopledger(), "synth", "--assets", str(assets), "--years", str(years), str(fleet)],
                       check=True)
    files = sum(len(f) for _, _, f in os.walk(fleet / "results"))
    row: dict[str, object] = {"assets": assets, "years": years, "files": files, "handbook": handbook}
    print(f"\n== {assets} assets x {years} years: {files} result files", flush=True)
    floor_cmd = [sys.executable, "-c", FLOOR, str(fleet)]
    timed(floor_cmd)  # a first read warms the file cache for every command
    floors: list[float] = []

    def measure(name: str, cmd: list[str]) -> None:
        """Time the floor, then ``cmd`` straight after it: its ratio is against that floor (this machine's
        speed drifts within a minute, so a floor read long before would skew it)."""
        if name != "floor":
            floors.append(timed(floor_cmd)[0])
            row[f"{name}_floor"] = floors[-1]
        row[name], row[f"{name}_rss"], code, last = timed(cmd)
        if name == "floor":
            floors.append(float(row[name]))  # type: ignore[arg-type]
        beside = f"  (floor just before: {floors[-1]:.1f} s)" if name != "floor" else ""
        print(f"  {name:<12} {row[name]:8.1f} s  {row[f'{name}_rss']:6d} MiB  exit {code}  {last}{beside}",
              flush=True)

    measure("floor", floor_cmd)
    measure("check", [*loopledger(), "check", str(fleet)])
    if skip_run:
        row["floor"] = statistics.median(floors)
        return row
    shutil.rmtree(out, ignore_errors=True)
    yamls = sorted((fleet / "results").rglob("*.yaml"))
    victim = yamls[0]
    original = victim.read_bytes()
    latest = yamls[-1]  # a new test of this asset, a repeat of its latest, dated as_of (or the day before)
    new_test, new_text = new_test_file(fleet, latest)
    try:
        steps = (("cold", None), ("nochange", None), ("onechanged", b"\n# benchmark edit\n"), ("newtest", None))
        for name, edit in steps:
            if edit is not None:
                victim.write_bytes(original + edit)
            if name == "newtest":
                new_test.write_text(new_text, encoding="utf-8")
            measure(name, [*loopledger(), "run", str(fleet), "--out", str(out),
                           *([] if handbook else ["--no-handbook"])])
    finally:
        victim.write_bytes(original)
        new_test.unlink(missing_ok=True)
    row["floor"] = statistics.median(floors)  # the floor column: the median of its reads
    return row


def new_test_file(fleet: Path, latest: Path) -> tuple[Path, str]:
    """Where the one-new-test step writes its file, and its text: ``latest`` again, dated the fleet's
    ``as_of`` (the day before when ``latest`` is of that day)."""
    import datetime as dt
    import re
    import tomllib

    as_of = tomllib.loads((fleet / "loopledger.toml").read_text(encoding="utf-8"))["as_of"]
    text = latest.read_text(encoding="utf-8")
    old = re.search(r"^date: (\S+)$", text, re.M)
    assert old is not None, latest
    day = as_of if str(as_of) != old.group(1) else as_of - dt.timedelta(days=1)
    return latest.with_name(latest.name.replace(old.group(1), str(day))), text.replace(old.group(0), f"date: {day}")


def table(rows: list[dict[str, object]]) -> str:
    head = ("| fleet | files | floor (bare parse, median) | check | cold run | no-change rerun | one-changed rerun "
            "| one-new-test rerun | peak RSS (run) |\n|---|---:|---:|---:|---:|---:|---:|---:|---:|\n")
    lines = []
    for r in rows:
        floor = float(r["floor"])  # type: ignore[arg-type]

        def cell(key: str, floor: float = floor, r: dict[str, object] = r) -> str:
            if key not in r:
                return "—"
            v = float(r[key])  # type: ignore[arg-type]
            paired = float(r.get(f"{key}_floor", floor))  # type: ignore[arg-type]
            return f"{v:.1f} s ({v / paired:.2f}×)"
        rss = max(int(r.get(k, 0)) for k in ("check_rss", "cold_rss", "nochange_rss", "onechanged_rss",  # type: ignore[call-overload]
                                              "newtest_rss"))
        what = "" if r.get("handbook", True) else " (run --no-handbook)"
        lines.append(f"| {r['assets']} assets × {r['years']} y{what} | {r['files']} | {floor:.1f} s "
                     f"| {cell('check')} | {cell('cold')} | {cell('nochange')} | {cell('onechanged')} "
                     f"| {cell('newtest')} | {rss} MiB |")
    text = head + "\n".join(lines) + "\n"
    if len(rows) >= 2:
        a, b = rows[0], rows[-1]
        growth = []
        for key in ("floor", "check", "cold", "onechanged", "newtest"):
            if key in a and key in b:
                growth.append(f"{key} {float(b[key]) / float(a[key]):.1f}×")  # type: ignore[arg-type]
        text += f"\nGrowth from {a['files']} to {b['files']} files: {', '.join(growth)}.\n"
    return text


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--assets", type=int, nargs="+", default=[200, 2000])
    parser.add_argument("--years", type=int, default=10)
    parser.add_argument("--workdir", type=Path, default=ROOT / "build" / "bench")
    parser.add_argument("--skip-run", action="store_true", help="floor and check only (no run)")
    parser.add_argument("--no-handbook", action="store_true", help="time `run --no-handbook` (data/ only)")
    args = parser.parse_args()
    args.workdir.mkdir(parents=True, exist_ok=True)
    print(f"{platform.platform()}, {os.cpu_count()} CPUs, Python {platform.python_version()}, "
          f"load average {os.getloadavg()[0]:.1f}", flush=True)
    rows = [bench_fleet(n, args.years, args.workdir, args.skip_run, not args.no_handbook) for n in args.assets]
    text = table(rows)
    print("\n" + text)
    (args.workdir / "results.md").write_text(text, encoding="utf-8")
    (args.workdir / "results.json").write_text(json.dumps(rows, indent=2), encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
