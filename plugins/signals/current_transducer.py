"""Signal type ``current-transducer``: an AC current transducer fed from a current transformer.

The transducer maps its secondary input range (e.g. 0-1 A) onto its output
(e.g. 4-20 mA). With ``injection: primary`` the inputs are primary amps
through the current transformer, divided by ``ct_ratio`` (``2000/1``) first.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import scaling
from loopledger.context import RunContext
from loopledger.contracts import SignalType
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl

#: ``2000/1`` -> 2000.0 (kept under its old name; the parser lives in :mod:`scaling`)
ct_ratio = scaling.ratio


class CurrentTransducer(SignalType):
    name = "current-transducer"
    description = "Current transducer fed from a current transformer; 4-20 mA (or other) output"
    input_units = ("A",)
    asset_columns = {"ct_ratio": "current-transformer ratio such as 2000/1, for primary injection"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        primary = points["injection"] == "primary"
        ratio = ct_ratio(points["ct_ratio"]) if "ct_ratio" in points else pd.Series(np.nan, index=points.index)
        findings = [error("injection: primary needs the asset's ct_ratio in assets.csv (e.g. 2000/1)",
                          field="injection", **scaling.where(points, idx))
                    for idx in points.index[primary & ratio.isna()]]
        scale = pd.Series(np.where(primary, ratio, 1.0), index=points.index)
        frame, more = scaling.linear_evaluate(points, scale)
        return frame, findings + more


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [CurrentTransducer()]
