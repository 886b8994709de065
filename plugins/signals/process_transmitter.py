"""Signal type ``process-transmitter``: pressure, level and flow transmitters with a 4-20 mA output.

``characteristic`` is ``linear`` (output ∝ input) or ``sqrt``: a differential-
pressure flow transmitter extracts the square root, because flow through an
orifice plate or venturi goes as the root of the pressure drop (Q ∝ √ΔP, the
flow equation, common practice): 25 % of ΔP is 50 % of flow, i.e. 12 mA on
4-20 mA. Near zero the root's slope is unbounded and noise would be amplified,
so transmitters hold the output at zero flow below a low-flow cut-off:
``low_flow_cutoff_pct`` in assets.csv, in % of flow (output), blank = none.
Below the cut-off the expected output is ``output_min`` and the sensitivity 0.
At exactly 0 % of a square-root range with no cut-off the sensitivity is
unbounded: it is left NaN and the file gets a note saying so.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import asset_columns, scaling
from loopledger.context import RunContext
from loopledger.contracts import SignalType
from loopledger.findings import Finding, note
from loopledger.hookspecs import hookimpl
from loopledger.schemas.signals import ProcessTransmitterColumns


def apply_cutoff(frame: pd.DataFrame, points: pd.DataFrame, cutoff_pct: pd.Series) -> pd.DataFrame:
    """Hold the expected output at ``output_min`` where the output is below the cut-off (% of output)."""
    lo, hi = points["output_min"].astype(float), points["output_max"].astype(float)
    out_pct = (frame["expected"] - lo) / (hi - lo) * 100.0
    cut = cutoff_pct.fillna(0.0).astype(float)
    # strictly below: a point at the cut-off (to rounding: √0.01 gives 9.999999999999996 %) is not held
    below = (cut > 0) & (out_pct < cut) & ~np.isclose(out_pct, cut, rtol=1e-9, atol=1e-9)
    frame = frame.copy()
    frame["expected"] = np.where(below, lo, frame["expected"])
    frame["sensitivity"] = np.where(below, 0.0, frame["sensitivity"])
    return frame


class ProcessTransmitter(SignalType):
    name = "process-transmitter"
    description = "Pressure, level or flow transmitter; linear or square-root (DP flow) with low-flow cut-off"
    asset_columns = {"low_flow_cutoff_pct": "% of flow (output) below which the output is held at zero flow; "
                                            "blank = no cut-off"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        cols, findings = asset_columns.check(points, ProcessTransmitterColumns)
        frame, more = scaling.linear_evaluate(points)
        frame = apply_cutoff(frame, points, cols["low_flow_cutoff_pct"])
        unbounded = frame["sensitivity"].isna() & frame["expected"].notna()
        findings += [note("square root at 0 % of the input: the output's sensitivity to the input is unbounded "
                          "here (no low_flow_cutoff_pct for this asset), so this point has no sensitivity",
                          field="input", **scaling.where(points, i))
                     for i in points.loc[unbounded].drop_duplicates("source_file").index]
        return frame, findings + more


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [ProcessTransmitter()]
