"""Signal type ``rtd-transmitter``: a platinum RTD temperature transmitter.

Inputs are written as temperature (``150 °C``, an RTD simulator) or as the
resistance a decade box injects (``157.33 ohm``): resistance is converted to
temperature with the IEC 60751 Callendar–Van Dusen equation (``plugins/rtd.py``),
R0 from the asset's ``r0_ohm`` (blank = 100 Ω, a Pt100; 1000 for a Pt1000).
For resistance inputs ``injected`` is the resistance and the sensitivity is
(output span / input span) × dt/dR, so the decade box's specification in ohms
is carried through to the output.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import asset_columns, scaling
from loopledger.context import RunContext
from loopledger.contracts import SignalType
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.plugins.signals import rtd
from loopledger.schemas.signals import RtdTransmitterColumns

DEFAULT_R0 = 100.0


class RtdTransmitter(SignalType):
    name = "rtd-transmitter"
    description = "Platinum RTD transmitter; input as temperature or as decade-box ohms (IEC 60751)"
    input_units = ("degC",)
    asset_columns = {"r0_ohm": "sensor resistance at 0 °C (blank = 100 ohm, Pt100)"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        cols, findings = asset_columns.check(points, RtdTransmitterColumns)
        r0 = cols["r0_ohm"].astype(float).fillna(DEFAULT_R0)
        via, ohms = scaling.written_as(points, "ohm")
        t = pd.Series(rtd.temperature(ohms.where(via).to_numpy(), r0.to_numpy()), index=points.index)
        with np.errstate(divide="ignore", invalid="ignore"):
            dt_dr = 1.0 / pd.Series(rtd.slope(t.to_numpy(), r0.to_numpy()), index=points.index)
        findings += [error(f"{ohms[i]:g} ohm is outside the IEC 60751 range {rtd.T_MIN:g}..{rtd.T_MAX:g} °C "
                           f"for R0 = {r0[i]:g} ohm", field="input", **scaling.where(points, i))
                     for i in points.index[via & t.isna()]]
        frame, more = scaling.evaluate_via(points, via, t, "degC", ohms, "ohm", dt_dr)
        return frame, findings + more


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [RtdTransmitter()]
