"""Signal type ``power-transducer``: active (or reactive) power transducer, often bidirectional.

An import/export transducer of −500..+500 kW onto 4-20 mA gives 12 mA at zero
power: the range arithmetic is the same linear map as any other transducer
(``plugins/scaling.py``), applied to a range that straddles zero. Inputs are
written as power (``-250 kW``; ``kvar`` for reactive power) or as % of range. With ``injection: primary``
the written power is primary power, divided by ``ct_ratio`` × ``vt_ratio`` (a blank
one of the two counts as 1, e.g. a low-voltage transducer wired direct to the busbar). The ratio-error
limits of ``ct_class`` and ``vt_class`` enter the budget (:mod:`.transformers`); for the CT's limit
the current is taken as the input's % of the larger end of the transducer's range (our assumption:
the range matches the CT's rated current at rated voltage and unity power factor). The transformers'
phase displacement, which moves power through the power factor, is left out, and the budget says so.

Active power (W), reactive power (var) and apparent power (VA) are different quantities in one SI unit
(IEC 80000-6 gives each its name; from memory), so pint converts between them freely. An input written
as one kind for an asset ranged in another (``50 kvar`` on a kW transducer) is converted as written and
gets a warning: the quantity injected may not be the one the transducer measures.
"""

from __future__ import annotations

import re

import pandas as pd
from loopledger import asset_columns, scaling
from loopledger.context import RunContext
from loopledger.contracts import SignalType
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl
from loopledger.plugins.signals import transformers
from loopledger.plugins.signals.voltage_transducer import primary_scale
from loopledger.schemas.signals import PowerTransducerColumns


class PowerTransducer(SignalType):
    name = "power-transducer"
    description = ("Power transducer (W, kW, MW; kvar for reactive power; bidirectional ranges such as "
                   "-500..+500 kW); any output")
    input_units = ("W",)
    asset_columns = {"ct_ratio": "current-transformer ratio (primary injection)",
                     "vt_ratio": "voltage-transformer ratio (primary injection); primary power = "
                                 "secondary power × ct_ratio × vt_ratio",
                     "ct_class": "the CT's accuracy class (IEC 61869-2), for its ratio error under primary injection",
                     "vt_class": "the VT's accuracy class (IEC 61869-3), for its ratio error under primary injection"}

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        cols, findings = asset_columns.check(points, PowerTransducerColumns)
        ct, vt = scaling.ratio(cols["ct_ratio"]), scaling.ratio(cols["vt_ratio"])
        ratio = (ct.fillna(1.0) * vt.fillna(1.0)).where(ct.notna() | vt.notna())
        scale, more = primary_scale(points, ratio, "ct_ratio and vt_ratio")
        frame, rest = scaling.linear_evaluate(points, scale)
        through = (points["injection"] == "primary") & ct.notna()
        ends = points[["input_min", "input_max"]].astype(float).abs().max(axis=1) * scale
        pct = frame["injected"].abs() / ends * 100.0
        ct_pct, ct_blank = transformers.ct_error(points[through], frame["injected"][through],
                                                 cols["ct_class"][through], pct[through])
        frame["ct_error_pct"] = ct_pct.reindex(points.index)
        through = (points["injection"] == "primary") & vt.notna()
        vt_pct, vt_blank = transformers.vt_error(points[through], cols["vt_class"][through])
        frame["vt_error_pct"] = vt_pct.reindex(points.index)
        return frame, findings + more + rest + ct_blank + vt_blank + _other_kind_of_power(points)


#: the power a unit name stands for; a name matching none (a unit pint spells otherwise) is not compared
_KINDS = (("reactive", re.compile(r"[munµkMG]?(?:var|VAr)|volt_ampere_reactive")),
          ("apparent", re.compile(r"[munµkMG]?VA|volt_ampere")),
          ("active", re.compile(r"[munµkMG]?W|(?:milli|kilo|mega|giga)?watt")))


def power_kind(unit: str) -> str | None:
    """``active``, ``reactive`` or ``apparent`` for a power unit's name; None when it names none of them."""
    text = str(unit).strip()
    return next((kind for kind, pattern in _KINDS if pattern.fullmatch(text)), None)


def _other_kind_of_power(points: pd.DataFrame) -> list[Finding]:
    """A warning for each input written as another kind of power than the asset's range."""
    found: list[Finding] = []
    pairs = points[["input_written_unit", "input_unit"]].astype(str).drop_duplicates()
    for written, ranged in pairs.itertuples(index=False):
        kind, theirs = power_kind(written), power_kind(ranged)
        if kind is None or theirs is None or kind == theirs:
            continue
        rows = points.index[(points["input_written_unit"].astype(str) == written)
                            & (points["input_unit"].astype(str) == ranged)]
        found += [warning(f"input '{points.at[i, 'input']}' is {kind} power but the asset is ranged in {ranged}, "
                          f"{theirs} power: it was converted one for one (the three share one SI unit); check which "
                          "quantity was injected", field="input", **scaling.where(points, i))
                  for i in rows]
    return found


@hookimpl
def ll_signal_types() -> list[SignalType]:
    return [PowerTransducer()]
