"""The three built-in reading methods: ``direct``, ``shunt`` and ``display``.

- ``direct``: the output read on a milliamp (or volt) range, in the output's unit;
- ``shunt``: volts across a precision shunt; current = V / R with R from the registry;
- ``display``: the control system's reading in engineering units (``display_min``
  .. ``display_max``) or in % of its range, mapped back onto the output range.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.contracts import ReadingMethod
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.scaling import where


def _unit_error(points: pd.DataFrame, bad: pd.Series, wanted: str) -> list[Finding]:
    """One error per point of ``bad``; ``{output_unit}`` in ``wanted`` becomes the point's output unit."""
    return [error(f"reading unit '{points.at[i, 'reading_unit']}' is not "
                  + wanted.format(output_unit=points.at[i, "output_unit"])
                  + q.case_hint(str(points.at[i, "reading_unit"]), str(points.at[i, "output_unit"])),
                  field="reading", **where(points, i))
            for i in points.index[bad]]


class Direct(ReadingMethod):
    name = "direct"
    description = "output read directly on the meter's current (or voltage) range"

    def measured(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.Series, list[Finding]]:
        value = q.convert(points["reading"], points["reading_unit"], points["output_unit"])
        bad = value.isna() & points["reading"].notna()
        return value, _unit_error(points, bad, "in units of the output ({output_unit})")


def shunt_ohms(ctx: RunContext, ids: pd.Series) -> pd.Series:
    """Each shunt's resistance in ohms from instruments.yaml (NaN where unreadable)."""
    table = ctx.instruments
    values: dict[str, float] = {}
    for ident in pd.unique(ids.dropna()):
        try:
            values[str(ident)] = q.to_float(table.at[ident, "resistance"], "ohm")
        except (KeyError, ValueError, TypeError):
            values[str(ident)] = float("nan")
    return ids.map(values).astype(float)


class Shunt(ReadingMethod):
    name = "shunt"
    description = "volts read across a precision shunt resistor in series with the output"

    def measured(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.Series, list[Finding]]:
        volts = q.convert(points["reading"], points["reading_unit"], "V")
        findings = _unit_error(points, volts.isna() & points["reading"].notna(), "a voltage (method 'shunt')")
        ohms = shunt_ohms(ctx, points["shunt"])
        for ident in pd.unique(points.loc[ohms.isna(), "shunt"].dropna()):
            first = points.index[points["shunt"] == ident][0]
            findings.append(error(f"shunt '{ident}' has no readable resistance in instruments.yaml",
                                  field="instruments.shunt", file=points.at[first, "source_file"]))
        amps = volts / ohms
        value = q.convert(amps, pd.Series("A", index=points.index), points["output_unit"])
        not_current = value.isna() & amps.notna()
        findings += [error(f"method 'shunt' needs a current output, but the asset's output is in "
                           f"{points.at[i, 'output_unit']}", field="method", **where(points, i))
                     for i in points.index[not_current]]
        return value, findings


class Display(ReadingMethod):
    name = "display"
    description = "the control system's displayed value, mapped back onto the output range"

    def measured(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.Series, list[Finding]]:
        lo = pd.to_numeric(points["display_min"], errors="coerce")
        hi = pd.to_numeric(points["display_max"], errors="coerce")
        pct_given = points["reading_unit"] == q.PERCENT
        unit = points["display_unit"].fillna("").astype(str)
        value = q.convert(points["reading"], points["reading_unit"], unit.where(unit != "", "dimensionless"))
        frac = pd.Series(np.where(pct_given, points["reading"] / 100.0, (value - lo) / (hi - lo)), index=points.index)
        findings = [error("method 'display' needs display_min and display_max for the asset in assets.csv",
                          field="display_min", **where(points, i))
                    for i in points.index[~pct_given & (lo.isna() | hi.isna())]]
        findings += _unit_error(points, ~pct_given & value.isna() & lo.notna() & hi.notna(),
                                "in the display's unit (display_unit) or %")
        out_lo, out_hi = points["output_min"].astype(float), points["output_max"].astype(float)
        return out_lo + frac * (out_hi - out_lo), findings


@hookimpl
def ll_reading_methods() -> list[ReadingMethod]:
    return [Direct(), Shunt(), Display()]
