"""Signal type ``voltage-transducer``: an AC or DC voltage transducer, any output range.

The transducer maps its input range (e.g. 0-120 V, or a bidirectional
−150..+150 V DC) linearly onto its output (4-20 mA, 0-20 mA, 0-10 V, 1-5 V:
``output_min``..``output_max`` in ``output_unit``). With ``injection:
primary`` the written inputs are primary volts through a voltage transformer,
divided by ``vt_ratio`` (``11000/110``) first, and the VT's ratio-error limit for its
``vt_class`` enters the budget (:mod:`.transformers`).
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
from loopledger.schemas.signals import VoltageTransducerColumns


def primary_scale(points: pd.DataFrame, ratio: pd.Series, needs: str) -> tuple[pd.Series, list[Finding]]:
    """The divisor from primary to secondary quantities (1 for secondary injection)."""
    primary = points["injection"] == "primary"
    findings = [error(f"injection: primary needs the asset's {needs} in assets.csv", field="injection",
                      **scaling.where(points, idx)) for idx in points.index[primary & ratio.isna()]]
    return pd.Series(np.where(primary, ratio, 1.0), index=points.index), findings


class VoltageTransducer(SignalType):
    name = "voltage-transducer"
    description = "Voltage transducer (AC or DC, uni- or bidirectional); mA or V output of any range"
    input_units = ("V",)
    asset_columns = {"vt_ratio": "voltage-transformer ratio such as 11000/110, for primary injection",
                     "vt_class": "the VT's accuracy class (IEC 61869-3: 0.1, 0.2, 0.5, 1, 3), for its ratio error "
                                 "under primary injection"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        cols, findings = asset_columns.check(points, VoltageTransducerColumns)
        scale, more = primary_scale(points, scaling.ratio(cols["vt_ratio"]), "vt_ratio (e.g. 11000/110)")
        frame, rest = scaling.linear_evaluate(points, scale)
        frame["vt_error_pct"], blank = transformers.vt_error(points, cols["vt_class"])
        return frame, findings + more + rest + blank


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [VoltageTransducer()]
