"""The asset page's drift chart restarts the fitted line at each adjustment (invented plumbing data)."""

from __future__ import annotations

import pandas as pd
from loopledger.plugins import charts, page_rows

from tests.evidence import good_points, result_yaml, write_evidence

# as-found offsets in mA over four yearly tests; the third test was trimmed back to +0.005 mA
HISTORY = [("2022-03-01", 0.020, None), ("2023-03-01", 0.050, None), ("2024-03-01", 0.090, 0.005),
           ("2025-03-01", 0.035, None)]


def test_drift_line_follows_readings_after_an_adjustment(tmp_path, run_folder):
    results = {f"t{i}.yaml": result_yaml(date=d, as_found=good_points(f),
                                         as_left=good_points(left) if left is not None else None)
               for i, (d, f, left) in enumerate(HISTORY)}
    ctx = run_folder(write_evidence(tmp_path / "ev", results, config="as_of = 2025-06-01\n"))
    data = page_rows.drift_charts(ctx, ctx.assets.loc[["T-CT1"]], ctx.points)["T-CT1"]
    pts = pd.DataFrame(data["points"])
    fit = data["fits"][0]
    assert {"trims_pct", "as_left_pct"} <= set(pts.columns)
    last = pts[(pts["input_pct"] == fit["input_pct"]) & (pts["date"] == "2025-03-01")].iloc[0]
    years = (pd.Timestamp("2025-03-01") - pd.Timestamp(fit["ref_date"])).days / 365.25
    on_line = float(fit["intercept_pct"]) + float(fit["slope_pct_per_year"]) * years
    # the trim made in 2024 (0.085 mA = 0.53 % of the 16 mA span) must be taken off the line after it
    assert float(last["trims_pct"]) > 0.4
    assert abs(on_line - float(last["trims_pct"]) - float(last["error_pct"])) < abs(on_line - float(last["error_pct"]))
    svg = charts.drift_chart(data, "T-CT1")
    assert svg.startswith("<?xml") or "<svg" in svg[:400]
