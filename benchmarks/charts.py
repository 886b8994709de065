"""Time per handbook chart (the SVG and its text alternative) over the charts of an evidence folder.

Usage: .venv/bin/python benchmarks/charts.py [EVIDENCE]   (default: sample_results)
Runs the stages, collects every chart the handbook would draw, then draws each one and prints the
mean and worst milliseconds per chart of each kind.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

from loopledger import runner
from loopledger.host import get_plugin_manager
from loopledger.plugins.handbook import build, charts


def main(evidence: Path) -> None:
    ctx = runner.run(runner.RunOptions(evidence), get_plugin_manager(autoload=False))
    todo = [chart for job in build.jobs(ctx) for _rel, chart in sorted(job.charts.items())]
    spent: dict[str, list[float]] = {"error": [], "drift": []}
    for kind, data, title in todo:
        start = time.perf_counter()
        if kind == "error":
            charts.error_chart(data, title), charts.error_alt(data)
        else:
            charts.drift_chart(data, title), charts.drift_alt(data)
        spent[kind].append(time.perf_counter() - start)
    for kind, times in spent.items():
        if times:
            print(f"{kind:6s} {len(times):6d} charts  mean {1000 * sum(times) / len(times):6.2f} ms  "
                  f"worst {1000 * max(times):6.2f} ms")
    every = [t for times in spent.values() for t in times]
    if every:
        print(f"all    {len(every):6d} charts  mean {1000 * sum(every) / len(every):6.2f} ms")


if __name__ == "__main__":
    main(Path(sys.argv[1]) if len(sys.argv) > 1 else Path("sample_results"))
