"""Reading method ``counts``: a whole-loop check read as the input card's raw counts.

The control system's input card converts the loop current to a number; the
asset's ``counts_min`` and ``counts_max`` (assets.csv) are the counts it
reports at ``output_min`` and ``output_max`` — 0 and 4095 for a 12-bit card
scaled over 4-20 mA, 819 and 4095 for the same card scaled over 0-20 mA, or
whatever range the card's manual gives. A reading such as ``2047 counts`` is
mapped back onto the output range, so the error is that of the whole loop:
transmitter plus cable plus input card. (The ``display`` method does the same
for a reading in engineering units.) ``plugins/loop_split.py`` splits it.
"""

from __future__ import annotations

import pandas as pd
from loopledger import asset_columns
from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.contracts import ReadingMethod
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.scaling import where
from loopledger.schemas.signals import CountsColumns


class Counts(ReadingMethod):
    name = "counts"
    description = "the input card's raw counts (counts_min..counts_max at output_min..output_max)"

    def measured(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.Series, list[Finding]]:
        cols, findings = asset_columns.check(points, CountsColumns)
        counts = q.convert(points["reading"], points["reading_unit"], "count").where(
            points["reading_unit"] != q.PERCENT)
        bad = counts.isna() & points["reading"].notna()
        findings += [error(f"reading '{points.at[i, 'reading_text']}' is not in counts (write e.g. '2047 counts')",
                           field="reading", **where(points, i)) for i in points.index[bad]]
        lo, hi = cols["counts_min"].astype(float), cols["counts_max"].astype(float)
        out_lo, out_hi = points["output_min"].astype(float), points["output_max"].astype(float)
        return out_lo + (counts - lo) / (hi - lo) * (out_hi - out_lo), findings


@hookimpl
def ll_reading_methods() -> list[ReadingMethod]:
    return [Counts()]


@hookimpl
def ll_registry_keys() -> dict[str, dict[str, str]]:
    return {"assets.csv": {"counts_min": "the raw count the input card reports at output_min",
                           "counts_max": "the raw count the input card reports at output_max"}}
