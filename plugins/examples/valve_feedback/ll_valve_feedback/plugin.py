"""Signal type ``valve-position``: a positioner's 0-20 mA position feedback, with a dead band.

The input is the demand given to the positioner (in the asset's input range,
e.g. 4-20 mA, or written as % of stroke); the output is the position
feedback. The positioner stops driving once the valve is within half the dead
band of the demand, so the valve settles at

    position = demand − deadband/2   approaching from below (direction: up)
    position = demand + deadband/2   approaching from above (direction: down)
    position = demand                when no direction is recorded

clipped to the stroke (0..100 %). The shift is constant, so the sensitivity
d expected / d injected is the plain output span / input span, and 0 where
the position is clipped at an end of the stroke.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger.api import Finding, RunContext, SignalType, check_columns, hookimpl, scaling

from ll_valve_feedback.schema import ValvePositionColumns


def settled_position_pct(demand_pct: pd.Series, direction: pd.Series, deadband_pct: pd.Series) -> pd.Series:
    """Where the valve would come to rest, in % of stroke, before the stroke's ends stop it."""
    sign = direction.map({"up": -1.0, "down": 1.0}).fillna(0.0).astype(float)
    return demand_pct + sign * deadband_pct.fillna(0.0).astype(float) / 2.0


class ValvePosition(SignalType):
    name = "valve-position"
    description = "Valve positioner position feedback (e.g. 0-20 mA) with a dead band (example site plugin)"
    asset_columns = {"deadband_pct": "positioner dead band, % of stroke (blank = 0)"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        cols, findings = check_columns(points, ValvePositionColumns)
        frame, more = scaling.linear_evaluate(points)  # demand position, injected, plain sensitivity
        position = settled_position_pct(frame["input_pct"], points["direction"], cols["deadband_pct"])
        lo, hi = points["output_min"].astype(float), points["output_max"].astype(float)
        frame["expected"] = lo + position.clip(0.0, 100.0) / 100.0 * (hi - lo)
        at_a_stop = (position < 0.0) | (position > 100.0)  # on the seat or fully open: cannot move
        frame["sensitivity"] = np.where(at_a_stop, 0.0, frame["sensitivity"])
        return frame, findings + more


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [ValvePosition()]
