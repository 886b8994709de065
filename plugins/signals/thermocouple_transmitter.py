"""Signal type ``thermocouple-transmitter``: a thermocouple temperature transmitter.

Inputs are written as temperature (``400 °C``: a calibrator simulating the
thermocouple with its own cold-junction compensation, wired with
thermocouple cable) or as the emf injected (``16.397 mV``: a millivolt source
wired with copper leads). A transmitter compensates for its own terminals'
temperature, so for a millivolt input it indicates the temperature t with
E(t) = E_injected + E(t_cj), where t_cj is the reference-junction temperature
recorded in the result file's ``cjc_c`` header field. E is the IEC 60584-1
reference function of the asset's ``tc_type`` (``plugins/thermocouple.py``).
For millivolt inputs ``injected`` is the emf and the sensitivity is
(output span / input span) / (dE/dt at t). Since t depends on t_cj through E(t_cj), such a
point also gets ``cjc_sensitivity`` = sensitivity × dE/dt at t_cj (output per °C at the cold
junction), which carries ``cjc_u`` (or the ``cjc_probe``'s accuracy) into the budget.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import asset_columns, keys, scaling
from loopledger.context import RunContext
from loopledger.contracts import SignalType
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.plugins.signals import thermocouple
from loopledger.schemas.signals import ThermocoupleTransmitterColumns


class ThermocoupleTransmitter(SignalType):
    name = "thermocouple-transmitter"
    description = "Thermocouple transmitter; input as temperature or as mV with cold-junction compensation " \
                  "(IEC 60584-1)"
    input_units = ("degC",)
    asset_columns = {"tc_type": "thermocouple type: B, E, J, K, N, R, S or T (required)"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        cols, findings = asset_columns.check(points, ThermocoupleTransmitterColumns)
        kind = cols["tc_type"]
        via, mv = scaling.written_as(points, "mV")
        cjc = pd.to_numeric(points["cjc_c"], errors="coerce") if "cjc_c" in points else \
            pd.Series(np.nan, index=points.index)
        needs_cjc = via & kind.notna() & cjc.isna()
        findings += [error("an input written in mV needs the reference-junction temperature: add cjc_c "
                           "(°C at the transmitter's terminals) to the result file", field="cjc_c",
                           **scaling.where(points, i)) for i in points.index[needs_cjc]]
        rows = via & kind.notna() & cjc.notna()
        t = thermocouple.temperature(mv.where(rows), kind.where(rows), cjc.where(rows))
        findings += [error(f"{mv[i]:g} mV with the reference junction at {cjc[i]:g} °C is outside type "
                           f"{kind[i]}'s range", field="input", **scaling.where(points, i))
                     for i in points.index[rows & t.isna()]]
        with np.errstate(divide="ignore", invalid="ignore"):
            dt_de = 1.0 / thermocouple.seebeck(t, kind.where(rows))
        frame, more = scaling.evaluate_via(points, via, t, "degC", mv, "mV", dt_de)
        # d output / d t_cj = d output / d E × dE/dt at the cold junction (the emf added for it)
        frame["cjc_sensitivity"] = frame["sensitivity"] * thermocouple.seebeck(cjc.where(rows), kind.where(rows))
        ctx.stash.setdefault(keys.TEST_EXPORTS, []).append("cjc_c")
        return frame, findings + more


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [ThermocoupleTransmitter()]
