"""Signal type ``current-transducer``: an AC current transducer fed from a current transformer.

The transducer maps its secondary input range (e.g. 0-1 A) onto its output
(e.g. 4-20 mA). With ``injection: primary`` the inputs are primary amps
through the current transformer, divided by ``ct_ratio`` (``2000/1``) first, and the
CT's ratio-error limit for its ``ct_class`` at the injected current (% of the rated primary)
enters the budget (:mod:`.transformers`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import asset_columns, scaling
from loopledger.context import RunContext
from loopledger.contracts import SignalType
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.plugins.signals import transformers
from loopledger.schemas.signals import CurrentTransducerColumns

#: ``2000/1`` -> 2000.0 (kept under its old name; the parser lives in :mod:`scaling`)
ct_ratio = scaling.ratio


class CurrentTransducer(SignalType):
    name = "current-transducer"
    description = "Current transducer fed from a current transformer; 4-20 mA (or other) output"
    input_units = ("A",)
    asset_columns = {"ct_ratio": "current-transformer ratio such as 2000/1, for primary injection",
                     "ct_class": "the CT's accuracy class (IEC 61869-2: 0.1, 0.2, 0.5, 1, 3, 5), for its ratio "
                                 "error under primary injection"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        primary = points["injection"] == "primary"
        ratio = ct_ratio(points["ct_ratio"]) if "ct_ratio" in points else pd.Series(np.nan, index=points.index)
        findings = [error("injection: primary needs the asset's ct_ratio in assets.csv (e.g. 2000/1)",
                          field="injection", **scaling.where(points, idx))
                    for idx in points.index[primary & ratio.isna()]]
        scale = pd.Series(np.where(primary, ratio, 1.0), index=points.index)
        frame, more = scaling.linear_evaluate(points, scale)
        cols, checked = asset_columns.check(points, CurrentTransducerColumns)
        rated = transformers.rated_primary(points["ct_ratio"]) if "ct_ratio" in points else np.nan
        frame["ct_error_pct"], blank = transformers.ct_error(points, frame["injected"], cols["ct_class"],
                                                             frame["injected"].abs() / rated * 100.0)
        return frame, findings + more + checked + blank


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [CurrentTransducer()]
