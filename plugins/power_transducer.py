"""Signal type ``power-transducer``: active (or reactive) power transducer, often bidirectional.

An import/export transducer of −500..+500 kW onto 4-20 mA gives 12 mA at zero
power: the range arithmetic is the same linear map as any other transducer
(``plugins/scaling.py``), applied to a range that straddles zero. Inputs are
written as power (``-250 kW``; ``kvar`` for reactive power) or as % of range. With ``injection: primary``
the written power is primary power, divided by ``ct_ratio`` × ``vt_ratio`` (a blank
one of the two counts as 1, e.g. a low-voltage transducer wired direct to the busbar).
"""

from __future__ import annotations

import pandas as pd
from loopledger.context import RunContext
from loopledger.contracts import SignalType
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl
from loopledger.plugins import asset_columns, scaling
from loopledger.plugins.voltage_transducer import primary_scale
from loopledger.schemas.signals import PowerTransducerColumns


class PowerTransducer(SignalType):
    name = "power-transducer"
    description = ("Power transducer (W, kW, MW; kvar for reactive power; bidirectional ranges such as "
                   "-500..+500 kW); any output")
    input_units = ("W",)
    asset_columns = {"ct_ratio": "current-transformer ratio (primary injection)",
                     "vt_ratio": "voltage-transformer ratio (primary injection); primary power = "
                                 "secondary power × ct_ratio × vt_ratio"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        cols, findings = asset_columns.check(points, PowerTransducerColumns)
        ct, vt = scaling.ratio(cols["ct_ratio"]), scaling.ratio(cols["vt_ratio"])
        ratio = (ct.fillna(1.0) * vt.fillna(1.0)).where(ct.notna() | vt.notna())
        scale, more = primary_scale(points, ratio, "ct_ratio and vt_ratio")
        frame, rest = scaling.linear_evaluate(points, scale)
        return frame, findings + more + rest


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [PowerTransducer()]
