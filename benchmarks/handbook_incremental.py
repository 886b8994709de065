"""Handbook build times: cold, rebuilt with nothing changed, rebuilt after one result file changed.

Usage: .venv/bin/python benchmarks/handbook_incremental.py [ASSETS] [TESTS_PER_ASSET]
Writes an invented fleet (plumbing data, not evidence) under a temporary folder.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from loopledger import runner  # noqa: E402
from loopledger.host import get_plugin_manager  # noqa: E402

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence  # noqa: E402


def main(n_assets: int = 60, per_asset: int = 4) -> None:
    root = Path(tempfile.mkdtemp(prefix="ll-handbook-bench-"))
    assets = [{**CT_ASSET, "asset": f"B-{i:03d}", "area": f"Panel {i % 6}"} for i in range(n_assets)]
    results = {f"{2022 + y}/B-{i:03d}.yaml": result_yaml(asset=f"B-{i:03d}", date=f"{2022 + y}-0{1 + i % 9}-15",
                                                         as_found=good_points(0.002 * y + 0.0001 * i))
               for i in range(n_assets) for y in range(per_asset)}
    ev = write_evidence(root / "ev", results, assets=assets)
    pm = get_plugin_manager(autoload=False)

    def once(label: str) -> None:
        ctx = runner.run(runner.RunOptions(ev), pm)
        start = time.perf_counter()
        runner.publish(ctx, root / "out")
        print(f"{label:28s} {time.perf_counter() - start:7.1f} s  {ctx.extras['handbook_build']}", flush=True)

    once("cold")
    once("rebuild, nothing changed")
    (ev / "results" / "2023" / "B-007.yaml").write_text(
        result_yaml(asset="B-007", date="2023-08-15", as_found=good_points(0.03)), encoding="utf-8")
    once("rebuild, one file changed")


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:3]))
