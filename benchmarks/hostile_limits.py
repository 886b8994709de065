"""Time and peak memory of `loopledger check` refusing each hostile file of issue 21 item 5.

    python benchmarks/hostile_limits.py [--workdir build/hostile]

Builds each case (the same builders as tests/pipeline/test_resource_limits.py), runs `loopledger check` on it in a
fresh interpreter three times, and prints a Markdown table of the median wall time (interpreter start and
imports included) and the peak resident memory (``VmHWM``). Also measures a run over an assets.csv of
100,000 rows, under the row limit, which the issue measured at 1.7 GiB.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from tests.evidence import good_points, result_yaml, write_evidence  # noqa: E402
from tests.pipeline.test_resource_limits import measure, xlsx_bomb  # noqa: E402


def _cases(work: Path) -> dict[str, Path]:
    cases: dict[str, Path] = {}
    ev = write_evidence(work / "bomb", {})
    (ev / "results").mkdir(exist_ok=True)
    (ev / "results" / "bomb.xlsx").write_bytes(xlsx_bomb(1_000, pad=1_000_000))
    cases["xlsx bomb (1.1 MB, unpacks to 1 GB)"] = ev
    ev = write_evidence(work / "rows", {})
    (ev / "results").mkdir(exist_ok=True)
    (ev / "results" / "rows.xlsx").write_bytes(xlsx_bomb(60_000))
    cases["xlsx of 60,000 points (15 MB unpacked)"] = ev
    head = result_yaml(as_found=good_points()).split("as_found:")[0]
    cases["YAML of 999,000 points (2.0 MB)"] = write_evidence(
        work / "yaml", {"million.yaml": head + "as_found: [" + ",".join(["1"] * 999_000) + "]\n"})
    rows = "".join("T-CT1,2026-04-14,as_found,50 %,12.000 mA\n" for _ in range(45_000))
    cases["CSV of 45,000 points (1.9 MB)"] = write_evidence(
        work / "csv", {"many.csv": "asset,date,phase,input,reading\n" + rows})
    for label, n in (("assets.csv of 250,000 rows (over the limit)", 250_000),
                     ("assets.csv of 100,000 rows (under the limit)", 100_000)):
        ev = write_evidence(work / f"assets{n}", {"a.yaml": result_yaml(as_found=good_points())})
        lines = (ev / "assets.csv").read_text(encoding="utf-8").splitlines()
        body = "".join(lines[1].replace("T-CT1", f"T-{i}", 1) + "\n" for i in range(n - 1))
        (ev / "assets.csv").write_text(lines[0] + "\n" + lines[1] + "\n" + body, encoding="utf-8")
        cases[label] = ev
    ev = write_evidence(work / "fifo", {"a.yaml": result_yaml(as_found=good_points())})
    os.mkfifo(ev / "results" / "pipe.yaml")
    cases["FIFO called pipe.yaml"] = ev
    return cases


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--workdir", type=Path, default=ROOT / "build" / "hostile")
    args = parser.parse_args()
    shutil.rmtree(args.workdir, ignore_errors=True)
    print("| case | exit | seconds (median of 3) | peak MiB |\n| --- | --- | --- | --- |")
    for label, ev in _cases(args.workdir).items():
        found = [measure("check", str(ev))[0] for _ in range(3)]
        seconds = statistics.median(f["seconds"] for f in found)
        print(f"| {label} | {int(found[0]['code'])} | {seconds:.2f} | {max(f['mib'] for f in found):.0f} |")


if __name__ == "__main__":
    main()
