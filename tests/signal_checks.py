"""Shared checks for signal-type tests (not a test module).

``finite_difference`` re-evaluates a signal type with each point's injected
quantity nudged by ±h and returns the central difference
(expected(x + h) − expected(x − h)) / 2h, the numerical check of the
analytic ``sensitivity`` each signal type reports (d expected / d injected).
"""

from __future__ import annotations

from typing import Any

import pandas as pd
import yaml
from loopledger.context import RunContext


def finite_difference(ctx: RunContext, signal: str, rel_step: float = 1e-6) -> pd.DataFrame:
    """Columns ``sensitivity`` (the plugin's) and ``numeric`` (central difference) for ``signal``'s points."""
    rows = ctx.points[ctx.points["signal"] == signal].copy()
    handler = ctx.signal_types[signal]
    x = rows["injected"].astype(float)
    h = rel_step * x.abs().clip(lower=1.0)
    out = []
    for sign in (1.0, -1.0):
        nudged = rows.assign(input_value=x + sign * h, input_written_unit=rows["injected_unit"])
        frame, findings = handler.evaluate(nudged, ctx)
        assert not [f for f in findings if f.severity == "error"], findings
        out.append(frame["expected"])
    numeric = (out[0] - out[1]) / (2 * h)
    return pd.DataFrame({"sensitivity": rows["sensitivity"], "numeric": numeric, "injected": x,
                         "injected_unit": rows["injected_unit"]})


def result_doc(asset: str, points: list[dict[str, Any]], method: str = "direct", date: str = "2026-04-14",
               phase: str = "as_found", **header: Any) -> str:
    """A YAML result file with full point mappings (input, reading, direction …)."""
    doc: dict[str, Any] = {"asset": asset, "date": date, "technician": "T. Tester", "connection": "standalone",
                           "method": method, "injection": "secondary", "ambient_c": 23.0,
                           "instruments": {"source": "SRC-1", "meter": "DMM-1"}}
    doc.update(header)
    doc[phase] = points
    return yaml.safe_dump(doc, sort_keys=False, allow_unicode=True)


def asset(name: str, signal: str, input_range: tuple[float, float, str], output_range: tuple[float, float, str],
          **extra: Any) -> dict[str, Any]:
    """An assets.csv row (invented, for plumbing) with the given ranges."""
    row: dict[str, Any] = {"asset": name, "description": f"test {signal}", "site": "Test site", "area": "Panel",
                           "signal": signal, "input_min": input_range[0], "input_max": input_range[1],
                           "input_unit": input_range[2], "output_min": output_range[0],
                           "output_max": output_range[1], "output_unit": output_range[2],
                           "characteristic": "linear", "accuracy": "0.5", "interval_months": 12}
    row.update(extra)
    return row
