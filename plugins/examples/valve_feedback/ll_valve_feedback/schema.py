"""The assets.csv column this plugin reads, as a pandera model (checked per asset of the signal)."""

from __future__ import annotations

import pandera.pandas as pa
from pandera.typing import Series


class ValvePositionColumns(pa.DataFrameModel):
    """``valve-position``: ``deadband_pct``, the positioner's dead band in % of stroke (blank = 0)."""

    asset: Series[str]
    deadband_pct: Series[float] = pa.Field(nullable=True, ge=0, le=20)

    class Config:
        strict = False
        coerce = True
